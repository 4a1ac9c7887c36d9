package plan

import (
	"fmt"
	"math"
	"math/rand/v2"

	"trimline/instruments/budget"
	"trimline/sequencer/uncertainty"
)

// Simulate evaluates budget b's two pre-trim quantities (budget.PreOffset,
// budget.PreGainError, outputs 0 and 1) by uncertainty.MonteCarloModel with
// options o: each trial draws a unit (Budget.Draw) and takes its
// Unit.PreTrim. Each value is rounded as Run rounds it (preTrimResolution),
// far below anything a station resolves, so that a quantity no source moves
// is exactly constant and settles the adaptive stopping rule of JCGM
// 101:2008 §7.9 rather than chasing the fit's rounding noise.
func Simulate(b *budget.Budget, o uncertainty.MCOptions) (*uncertainty.MCRun, error) {
	resOffset, resGain := preTrimResolution(b)
	run, err := uncertainty.MonteCarloModel(2, func(r *rand.Rand, y []float64) {
		off, ge := b.Draw(r).PreTrim(b)
		y[0], y[1] = roundTo(off, resOffset), roundTo(ge, resGain)
	}, o)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", b.Path, err)
	}
	return run, nil
}

// preTrimResolution is the rounding of the pre-trim offset (10⁻¹² of the
// output's full swing, in the output's unit) and gain error (10⁻¹²).
func preTrimResolution(b *budget.Budget) (offset, gain float64) {
	t := &b.Transfer
	return 1e-12 * (math.Abs(t.OutputAtZero) + math.Abs(t.Gain)*math.Max(math.Abs(t.InputLow), math.Abs(t.InputHigh))), 1e-12
}
