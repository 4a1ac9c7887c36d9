package main

import (
	"context"
	"fmt"
	"strings"
	"time"

	"trimline/limits"
	"trimline/reports/ledger"
	"trimline/reports/whatif"
	"trimline/sequencer"
)

func newLimitsWhatIfCmd() *command {
	c := &command{
		UsageLine: "trimline limits whatif NEW --ledger DB [--product P] [--since DATE] [--until DATE] [--old FILE] [--pdf FILE]",
		Short:     "re-judge every stored result in the ledger against a new limit file",
		Long: `Re-judges the stored results of every judged production run in the ledger against
the limit file NEW and reports, against the old file (the one in force on the newest
run, or --old), the yield before and after and every unit whose verdict would flip.
Engineering runs, faulted and aborted runs are left out. With --pdf the report is
also written as a PDF with histograms.`,
	}
	ledgerPath := c.Flag.String("ledger", "", "ledger `file` to re-judge")
	product := c.Flag.String("product", "", "only units of this `product` (default: the new file's)")
	since := c.Flag.String("since", "", "only runs finished on or after this `date` (YYYY-MM-DD)")
	until := c.Flag.String("until", "", "only runs finished before the end of this `date` (YYYY-MM-DD)")
	oldPath := c.Flag.String("old", "", "the old limit `file` to compare with (default: the one in force on the newest run)")
	pdfPath := c.Flag.String("pdf", "", "also write the report with histograms to this PDF `file`")
	c.Run = func(ctx context.Context, e *env, pos []string) error {
		if len(pos) != 1 || *ledgerPath == "" {
			return usagef("usage: %s", c.UsageLine)
		}
		nw, err := loadLimitSet(pos[0])
		if err != nil {
			return err
		}
		var from, to time.Time
		for _, d := range []struct {
			s   string
			t   *time.Time
			add int
		}{{*since, &from, 0}, {*until, &to, 1}} {
			if d.s == "" {
				continue
			}
			v, err := time.Parse("2006-01-02", d.s)
			if err != nil {
				return usagef("expected a date as YYYY-MM-DD, found %q", d.s)
			}
			*d.t = v.AddDate(0, 0, d.add)
		}
		led, err := ledger.Open(ctx, *ledgerPath)
		if err != nil {
			return err
		}
		defer led.Close()
		runs, err := led.Runs(ctx, "")
		if err != nil {
			return err
		}
		var units []limits.StoredUnit
		var old *limits.Set
		if *oldPath != "" {
			if old, err = loadLimitSet(*oldPath); err != nil {
				return err
			}
		}
		for _, r := range runs {
			if (!from.IsZero() && r.Finished.Before(from)) || (!to.IsZero() && !r.Finished.Before(to)) {
				continue
			}
			if *product != "" && !strings.EqualFold(r.Product, *product) {
				continue
			}
			var verdict string
			switch r.Verdict {
			case sequencer.Pass:
				verdict = limits.VerdictPass
			case sequencer.Review:
				verdict = limits.VerdictReview
			case sequencer.Fail:
				verdict = limits.VerdictFail
			default:
				continue // faulted and aborted runs were never judged
			}
			rec, err := led.Run(ctx, r.RunID)
			if err != nil {
				return err
			}
			if rec.Engineering {
				continue // engineering runs never shipped; they say nothing about yield
			}
			if old == nil {
				// Runs are newest first: the first one's limit file is the one in force.
				for _, f := range rec.Files {
					if f.Kind != "limits" {
						continue
					}
					if b, err := led.Blob(ctx, f.SHA256); err == nil {
						old, _ = limits.Load(f.Name, b, sequencer.ResultCatalog)
					}
				}
			}
			u := limits.StoredUnit{Serial: rec.Serial, RunID: rec.RunID, Finished: rec.Finished, Product: rec.Product,
				OldVerdict: verdict, Values: map[string]limits.Value{}}
			for _, res := range rec.Results {
				u.Values[res.Name] = limits.Value{V: res.Value, Valid: res.Valid, Why: res.Note,
					Std: res.Unc.Std, U: res.Unc.Expanded, K: res.Unc.K, DOF: res.Unc.DOF}
			}
			units = append(units, u)
		}
		if len(units) == 0 {
			return badInput(fmt.Errorf("no judged runs in %s match", *ledgerPath))
		}
		rep := limits.WhatIf(old, nw, units)
		rep.WriteText(e.stdout)
		if *pdfPath != "" {
			if err := whatif.WriteFile(*pdfPath, rep, time.Now()); err != nil {
				return err
			}
			fmt.Fprintf(e.stdout, "\nreport with plots: %s\n", *pdfPath)
		}
		return nil
	}
	return c
}
