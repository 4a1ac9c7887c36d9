package main

import (
	"context"
	"errors"
	"fmt"
	"io/fs"

	"trimline/instruments/budget"
	"trimline/instruments/files"
	"trimline/instruments/units"
	planpdf "trimline/reports/plan"
	"trimline/sequencer/plan"
)

func newPlanCmd() *command {
	c := &command{
		UsageLine: "trimline plan BUDGET.yaml [--json] [--pdf FILE] [--target-yield 99.5 %] [--seed N] [--against LEDGER]",
		Short:     "from a product's error budget to trim codes, saturation, residuals, yield and DAC sizing",
		Long: `Reads the error budget BUDGET.yaml (README: Planning a trim) and draws units from it
by Monte Carlo, with the adaptive stopping rule of JCGM 101:2008 §7.9 on the
pre-trim offset and gain error (and on to 100 000 units for the yield). For both it
reports mean, standard deviation and the 95 % interval, beside the law of
propagation (JCGM 100) and the worst case, with each source's share of the
variance. Every unit drawn is trimmed as the station would trim it: the codes each
DAC of the budget's trim design will need, the fraction that would saturate it,
and what is left after trim (rounding to a code, saturation, DNL, or the rounding
of firmware coefficients), with the common-practice ½ LSB figure (u = LSB/√12)
beside.

With the limit file the budget names, the predicted yield: the fraction of units
whose post_offset and post_gain_error both pass their tolerances (the only
results the plan predicts; the others are listed), with its standard error
√(p(1 − p)/M). Then, for --target-yield, the recommendation: per DAC the fewest
bits and then the smallest range (2^bits·LSB) for which the result it trims passes
in that fraction of units.

--against LEDGER compares the predictions with what the stations of a ledger
measured on the budget's product (each unit's latest attempt, as trimline stats
counts them): pre-trim offset and gain error, each DAC's codes, post-trim
offset and gain error, per quantity a quantile table and the two-sample
Kolmogorov–Smirnov test (with the SD ratio's F test and Welch's test of the
means), a sentence that says which quantity disagrees and the sources with the
largest shares in it; then the yield and each DAC's saturation against the
counts measured (exact binomial test). A ledger that does not exist is an
error; no ledger is made.

The same --seed gives the same report. --pdf also writes the report with
histograms; --json writes one object of kind "plan" (README: Output for scripts).`,
	}
	asJSON := jsonFlag(c, "the plan (one object)")
	pdfPath := c.Flag.String("pdf", "", "also write the plan with histograms to this PDF `file`")
	target := c.Flag.String("target-yield", "99.5 %", "the `yield` the recommendation must meet, as a percentage")
	seed := c.Flag.Uint64("seed", 1, "`seed` of the random stream")
	against := c.Flag.String("against", "", "compare the predictions with what the stations of this ledger `file` measured")
	c.Run = func(ctx context.Context, e *env, args []string) error {
		if len(args) != 1 {
			return usagef("usage: %s", c.UsageLine)
		}
		ty, err := units.ParseRatio(*target)
		if err != nil || !(ty > 0 && ty < 1) {
			return usagef("--target-yield: expected a percentage above 0 and below 100 %%, such as 99.5 %%, found %q", *target)
		}
		b, err := budget.Load(args[0])
		if err != nil {
			if fe := files.Errs(err); fe != nil {
				return badInput(detailed(fe))
			}
			return badInput(err)
		}
		o := plan.Options{Seed: *seed, TargetYield: ty}
		if b.LimitsFile != "" {
			if o.Tolerances, err = plan.LoadTolerances(b.LimitsFile); err != nil {
				if fe := files.Errs(err); fe != nil {
					return badInput(fmt.Errorf("the budget's limit file: %w", detailed(fe)))
				}
				return badInput(err)
			}
		}
		r, err := plan.Run(ctx, b, o)
		if err != nil {
			return err
		}
		var cmp *planpdf.Comparison
		if *against != "" {
			c, err := planpdf.Against(ctx, *against, planpdf.PredictionOf(r), planpdf.Options{})
			if err != nil {
				if errors.Is(err, fs.ErrNotExist) {
					return badInput(err)
				}
				return err
			}
			cmp = &c
		}
		if *pdfPath != "" {
			if err := planpdf.WriteFile(*pdfPath, r, e.clock()); err != nil {
				return fmt.Errorf("--pdf: %w", err)
			}
		}
		if *asJSON {
			out := newPlanOut(r)
			if cmp != nil {
				out.Against = newAgainstOut(*cmp)
			}
			writeJSON(e.stdout, out)
			return nil
		}
		planpdf.WriteText(e.stdout, r)
		if cmp != nil {
			fmt.Fprintln(e.stdout)
			cmp.WriteText(e.stdout)
		}
		if *pdfPath != "" {
			fmt.Fprintf(e.stdout, "\nplan with histograms: %s\n", *pdfPath)
		}
		return nil
	}
	return c
}
