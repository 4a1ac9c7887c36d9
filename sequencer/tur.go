package sequencer

import (
	"errors"
	"fmt"
	"math"
	"strings"

	"trimline/instruments"
	"trimline/limits"
)

// ErrTUR is wrapped when a limit file with tur_policy: refuse asks for a test
// uncertainty ratio the station's instruments cannot reach.
var ErrTUR = errors.New("test uncertainty ratio below the limit file's minimum")

// PredictUncertainty estimates, before any unit is run, the expanded uncertainty of
// each result the station can reach from the instruments' specifications alone
// (Type B: meter and source specs and resolution, on a unit with exactly the ideal
// transfer). A unit's own noise only adds to it, so the TURs computed from these
// are upper bounds.
func PredictUncertainty(st *Station, seq *Sequence) map[string]limits.Value {
	e := &Engine{cfg: Config{Station: st, Sequence: seq}}
	out := map[string]limits.Value{}
	for _, sw := range []struct {
		plan                 SweepPlan
		offset, gain, nonlin string
	}{
		{seq.PreTrim, ResPreOffset, ResPreGainError, ResPreNonlinearity},
		{seq.Verify, ResPostOffset, ResPostGainError, ResPostNonlinearity},
	} {
		var ideal Sweep
		for _, x := range sw.plan.Levels() {
			y := seq.IdealGain*x + seq.IdealOffset
			ideal.Points = append(ideal.Points, Point{Stimulus: x, Mean: y, Valid: 1, Readings: make([]instruments.Reading, 1)})
		}
		e.annotate(&ideal)
		a, err := e.analyse(ideal, "predict")
		if err != nil {
			continue
		}
		res := newResults()
		e.fitResults(res, a, sw.offset, sw.gain, sw.nonlin)
		for _, n := range []string{sw.offset, sw.gain, sw.nonlin} {
			out[n] = res.values[n]
		}
		if sw.plan == seq.Verify && len(ideal.Points) > 0 {
			u, dof := pointErrorU(ideal.Points[len(ideal.Points)-1], math.Inf(1))
			un := e.unc(u, dof)
			out[ResPostMaxError] = limits.Value{Valid: true, Std: un.Std, U: un.Expanded, K: un.K, DOF: un.DOF}
		}
	}
	return out
}

// CheckTUR predicts every toleranced limit's TUR on this station. It returns the
// checks, and an error wrapping ErrTUR when the limit file's tur_policy is refuse
// and a two-sided limit falls below its minimum.
func CheckTUR(st *Station, seq *Sequence) ([]limits.TURCheck, error) {
	if seq.Limits == nil {
		return nil, nil
	}
	checks := seq.Limits.PredictTUR(PredictUncertainty(st, seq))
	if seq.Limits.Policy().TURPolicy != limits.TURRefuse {
		return checks, nil
	}
	var low []string
	for _, c := range checks {
		if c.Low && !c.OneSided {
			low = append(low, fmt.Sprintf("%q reaches %s, needs %s", c.Limit, turText(c.TUR), turText(c.Min)))
		}
	}
	if len(low) > 0 {
		return checks, fmt.Errorf("%w (%s, tur_policy: refuse): %s", ErrTUR, seq.Limits.File, strings.Join(low, "; "))
	}
	return checks, nil
}

func turText(v float64) string {
	if v <= 0 || math.IsNaN(v) {
		return "unknown"
	}
	return fmt.Sprintf("%.2f:1", v)
}
