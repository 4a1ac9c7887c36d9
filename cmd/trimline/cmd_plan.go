package main

import (
	"context"
	"fmt"

	"trimline/instruments/budget"
	"trimline/instruments/files"
	"trimline/instruments/units"
	planpdf "trimline/reports/plan"
	"trimline/sequencer/plan"
)

func newPlanCmd() *command {
	c := &command{
		UsageLine: "trimline plan BUDGET.yaml [--json] [--pdf FILE] [--target-yield 99.5 %] [--seed N]",
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

The same --seed gives the same report. --pdf also writes the report with
histograms; --json writes one object of kind "plan" (README: Output for scripts).`,
	}
	asJSON := jsonFlag(c, "the plan (one object)")
	pdfPath := c.Flag.String("pdf", "", "also write the plan with histograms to this PDF `file`")
	target := c.Flag.String("target-yield", "99.5 %", "the `yield` the recommendation must meet, as a percentage")
	seed := c.Flag.Uint64("seed", 1, "`seed` of the random stream")
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
		if *pdfPath != "" {
			if err := planpdf.WriteFile(*pdfPath, r, e.clock()); err != nil {
				return fmt.Errorf("--pdf: %w", err)
			}
		}
		if *asJSON {
			writeJSON(e.stdout, newPlanOut(r))
			return nil
		}
		planpdf.WriteText(e.stdout, r)
		if *pdfPath != "" {
			fmt.Fprintf(e.stdout, "\nplan with histograms: %s\n", *pdfPath)
		}
		return nil
	}
	return c
}
