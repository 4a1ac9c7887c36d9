package main

import (
	"bytes"
	"context"
	"errors"
	"flag"
	"fmt"
	"os"
	"strings"
	"time"

	"trimline/reports/stats"
)

func newStatsCmd() *command {
	c := &command{
		UsageLine: "trimline stats --ledger DB [--product P] [--revision R] [--station S] [--site S] [--lot L] [--since DAY] [--until DAY] [--by day|lot|station] [--include-engineering] [--json] [--csv] [--values FILE.csv] [--pdf FILE]",
		Short:     "quality numbers from the ledger: yield, first-pass yield, capability, histograms, trends",
		Long: `Reads the runs of the ledger that the filters let through and reports what a
quality engineer asks of them: yield, first-pass yield, retest and fault rates
with the counts behind them, the Pareto of failing limits, and for every
toleranced result n, mean, sd within (MR̄/1.128 of consecutive units in test
order) and overall, Cp, Cpk with 95 % confidence intervals (χ², Bissell 1990),
Pp, Ppk (NIST/SEMATECH e-Handbook §6.1.6), the expected fraction outside the
tolerance and a histogram over the tolerance band with the values below and above
it counted; the pre-trim results beside the post-trim ones; and each result's
mean and spread per day, lot or station (--by) against control limits. Every
number of a result is in its limit's unit.

Who counts for what is printed on every report: a unit is a serial; its latest
completed run (PASS, FAIL, REVIEW; a review decision gives the final verdict)
counts for yield and capability, earlier attempts for the retest rate; FAULT and
ABORTED runs count only in the fault rate; engineering runs are left out unless
--include-engineering.

Filters match ignoring case. --since and --until take a day, YYYY-MM-DD in UTC
(the whole day counts: both days are included), or an RFC 3339 time, a moment
(runs finished at or after --since, before --until).

Output: the report as text; --csv one row per toleranced result instead (named
columns, the unit, the tolerance, the intervals, the fraction outside, the mean
expanded uncertainty U); --json one object of kind "stats" (README: Output for
scripts); --values FILE.csv also writes one row per counted unit with its value
and U of every result; --pdf FILE also writes the A4 lot report with the plots.
The text, the JSON and the PDF state who was counted; the two CSVs hold data
only. When no run matches, the command says so and exits 2.`,
	}
	ledgerPath := c.Flag.String("ledger", "", "ledger `file` to read (one that does not exist is an error, never a new ledger)")
	var f stats.Filter
	c.Flag.StringVar(&f.Product, "product", "", "only runs of this `product`")
	c.Flag.StringVar(&f.Revision, "revision", "", "only runs of this product `revision`")
	c.Flag.StringVar(&f.Station, "station", "", "only runs made on this `station` id")
	c.Flag.StringVar(&f.Site, "site", "", "only runs made at this `site` (the station file's station.site)")
	c.Flag.StringVar(&f.Lot, "lot", "", "only runs of this production `lot` (run and demo --lot)")
	since := c.Flag.String("since", "", "only runs finished on or after this `day` (YYYY-MM-DD, UTC) or RFC 3339 time")
	until := c.Flag.String("until", "", "only runs finished on or before this `day` (YYYY-MM-DD, UTC), or before this RFC 3339 time")
	by := c.Flag.String("by", stats.ByDay, "trend groups: `day` (UTC), lot or station")
	c.Flag.BoolVar(&f.IncludeEngineering, "include-engineering", false, "count engineering runs (unreleased files) like production runs")
	asJSON := jsonFlag(c, "the report (one object)")
	asCSV := c.Flag.Bool("csv", false, "write the capability table as CSV on stdout instead of the text (one row per toleranced result)")
	valuesPath := c.Flag.String("values", "", "also write one CSV row per counted unit, every result's value and U, to this `file`")
	pdfPath := c.Flag.String("pdf", "", "also write the A4 lot report with the plots to this PDF `file`")
	c.Run = func(ctx context.Context, e *env, args []string) error {
		if len(args) != 0 {
			return usagef("stats takes no arguments, found %q (name the ledger with --ledger DB)", args[0])
		}
		if *ledgerPath == "" {
			return usagef("name the ledger: --ledger DB")
		}
		if *asJSON && *asCSV {
			return usagef("--json and --csv both ask for stdout: give one")
		}
		switch *by {
		case stats.ByDay, stats.ByLot, stats.ByStation:
		default:
			return usagef("--by must be day, lot or station, found %q", *by)
		}
		var err error
		if f.Since, err = parseDay("--since", *since, false); err != nil {
			return err
		}
		if f.Until, err = parseDay("--until", *until, true); err != nil {
			return err
		}
		if !f.Since.IsZero() && !f.Until.IsZero() && !f.Since.Before(f.Until) {
			return usagef("--since %s is not before --until %s: no run can match", *since, *until)
		}
		o := stats.Options{Filter: f, By: *by, Ledger: *ledgerPath, Generated: e.clock().UTC()}
		r, err := stats.Open(ctx, *ledgerPath, o)
		if errors.Is(err, stats.ErrNoRuns) {
			return badInput(noRunsError(*ledgerPath, &c.Flag, r, err))
		}
		if errors.Is(err, os.ErrNotExist) {
			return badInput(fmt.Errorf("no ledger at %s (give --ledger DB)", *ledgerPath))
		}
		if err != nil {
			return err
		}
		if *valuesPath != "" {
			var b bytes.Buffer
			if err := r.WriteValuesCSV(&b); err != nil {
				return err
			}
			if err := os.WriteFile(*valuesPath, b.Bytes(), 0o644); err != nil {
				return fmt.Errorf("--values: %w", err)
			}
		}
		if *pdfPath != "" {
			if err := stats.WriteFile(*pdfPath, r); err != nil {
				return fmt.Errorf("--pdf: %w", err)
			}
		}
		switch {
		case *asJSON:
			writeJSON(e.stdout, newStatsOut(r))
			return nil
		case *asCSV:
			return r.WriteCSV(e.stdout)
		}
		r.WriteText(e.stdout)
		if *valuesPath != "" || *pdfPath != "" {
			fmt.Fprintln(e.stdout)
		}
		if *valuesPath != "" {
			fmt.Fprintf(e.stdout, "values per unit: %s (%d units)\n", *valuesPath, len(r.Units))
		}
		if *pdfPath != "" {
			fmt.Fprintf(e.stdout, "lot report with plots: %s\n", *pdfPath)
		}
		return nil
	}
	return c
}

// parseDay reads the value of a --since or --until flag: a day, YYYY-MM-DD in
// UTC (for --until the moment after it ends, so that the day counts whole),
// or an RFC 3339 time. "" is no bound, the zero time.
func parseDay(name, s string, end bool) (time.Time, error) {
	if s == "" {
		return time.Time{}, nil
	}
	if d, err := time.Parse(time.DateOnly, s); err == nil {
		if end {
			d = d.AddDate(0, 0, 1)
		}
		return d, nil
	}
	if t, err := time.Parse(time.RFC3339Nano, s); err == nil {
		return t.UTC(), nil
	}
	return time.Time{}, usagef("%s: expected a day as YYYY-MM-DD (UTC) or an RFC 3339 time such as 2026-12-02T14:00:00Z, found %q", name, s)
}

// noRunsError says that nothing in the ledger matches, naming the ledger and
// the filters as they were given; it unwraps to err (stats.ErrNoRuns).
func noRunsError(ledgerPath string, fs *flag.FlagSet, r stats.Report, err error) error {
	var given []string
	fs.Visit(func(f *flag.Flag) {
		switch f.Name {
		case "product", "revision", "station", "site", "lot", "since", "until":
			given = append(given, fmt.Sprintf("--%s %s", f.Name, f.Value))
		case "include-engineering":
			given = append(given, "--include-engineering")
		}
	})
	msg := "nothing to report: no runs in " + ledgerPath
	if len(given) > 0 {
		msg += " match " + strings.Join(given, " ")
	}
	if n := r.Counts.Engineering; n > 0 && !r.Filter.IncludeEngineering {
		msg += fmt.Sprintf(" (%d engineering run(s) match, left out: add --include-engineering to count them)", n)
	}
	return &messageError{msg: msg, err: err}
}

// messageError is err with a message of its own for the person who reads it.
type messageError struct {
	msg string
	err error
}

func (m *messageError) Error() string { return m.msg }
func (m *messageError) Unwrap() error { return m.err }
