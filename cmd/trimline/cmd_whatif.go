package main

import (
	"context"
	"errors"
	"fmt"
	"time"

	"trimline/instruments/files"
	"trimline/reports/whatif"
)

func newLimitsWhatIfCmd() *command {
	c := &command{
		UsageLine: "trimline limits whatif NEW --ledger DB [--product P] [--since DATE] [--until DATE] [--old FILE] [--sequence FILE] [--pdf FILE]",
		Short:     "re-judge every stored result in the ledger against a new limit file",
		Long: `Re-judges the stored results of every judged production run in the ledger against
the limit file NEW and reports, against the old file (the one in force on the newest
run, or --old), the yield before and after and every unit whose verdict would flip.
Engineering runs, faulted and aborted runs are left out. With --pdf the report is
also written as a PDF with histograms.

The result names the limit files may use are those of the product's steps: with
--sequence, that sequence's; without it, those of the sequence files beside each
limit file that name it or are for the product it names (limit_set.product), and
when there are none, those the ledger's runs of that product recorded.`,
	}
	ledgerPath := c.Flag.String("ledger", "", "ledger `file` to re-judge")
	product := c.Flag.String("product", "", "only units of this `product` (default: the new file's)")
	since := c.Flag.String("since", "", "only runs finished on or after this `date` (YYYY-MM-DD)")
	until := c.Flag.String("until", "", "only runs finished before the end of this `date` (YYYY-MM-DD)")
	oldPath := c.Flag.String("old", "", "the old limit `file` to compare with (default: the one in force on the newest run)")
	sequence := c.Flag.String("sequence", "", "sequence `file` whose steps declare the result names the limit files may use")
	pdfPath := c.Flag.String("pdf", "", "also write the report with histograms to this PDF `file`")
	c.Run = func(ctx context.Context, e *env, pos []string) error {
		if len(pos) != 1 || *ledgerPath == "" {
			return usagef("usage: %s", c.UsageLine)
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
		req := whatif.Request{Ledger: *ledgerPath, NewFile: pos[0], OldFile: *oldPath, Product: *product,
			Since: from, Until: to, PDF: *pdfPath, Generated: time.Now()}
		if *sequence != "" { // the sequence's steps name the results; without it, Run reads the files
			var err error
			if req.New, err = loadLimitSet(pos[0], *sequence); err != nil {
				return err
			}
			if *oldPath != "" {
				if req.Old, err = loadLimitSet(*oldPath, *sequence); err != nil {
					return err
				}
			}
		}
		var loadErr *whatif.LoadError
		if _, err := whatif.Run(ctx, req, e.stdout); errors.Is(err, whatif.ErrNoRuns) {
			return badInput(err)
		} else if errors.As(err, &loadErr) {
			if fe := files.Errs(err); fe != nil {
				return badInput(detailed(fe))
			}
			return badInput(err)
		} else if err != nil {
			return err
		}
		if *pdfPath != "" {
			fmt.Fprintf(e.stdout, "\nreport with plots: %s\n", *pdfPath)
		}
		return nil
	}
	return c
}
