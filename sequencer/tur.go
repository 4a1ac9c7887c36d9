package sequencer

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strings"

	"trimline/instruments/units"
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
//
// It runs the sequence's steps on paper: every sweep sees a unit with exactly the
// ideal transfer and no noise, every fit and trim computes as on the bench, and
// the results' uncertainties are returned by name. skip_if is not applied: the
// prediction covers every step a unit may go through.
func PredictUncertainty(st *Station, seq *Sequence) map[string]limits.Value {
	out := map[string]limits.Value{}
	u, ok := onPaper(st, seq)
	if !ok {
		return out
	}
	// On paper every channel is the same ideal unit: a per-channel result's
	// uncertainty is its first channel's.
	for _, d := range seq.Results() {
		if _, done := out[d.Name]; done {
			continue
		}
		if _, evaluated := u.res.unc[d.Key()]; evaluated && u.res.values[d.Key()].Valid {
			out[d.Name] = u.res.values[d.Key()]
		}
	}
	return out
}

// onPaper runs the sequence's steps on paper (the unit in predicting mode, by
// the current metrology revision); ok is false when a step could not run.
func onPaper(st *Station, seq *Sequence) (u *Unit, ok bool) {
	rec := &Record{Serial: "predict", RunID: "predict", Metrology: CurrentMetrology}
	u = newUnit(Config{Station: st, Sequence: seq}, rec, predicting)
	return u, runSteps(context.Background(), u) == nil
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
			low = append(low, fmt.Sprintf("%q reaches %s, needs %s", c.Limit, turText(c.TUR, true), turText(c.Min, false)))
		}
	}
	if len(low) > 0 {
		return checks, fmt.Errorf("%w (%s, tur_policy: refuse): %s", ErrTUR, seq.Limits.File, strings.Join(low, "; "))
	}
	return checks, nil
}

// turText writes a TUR as the certificate does (units.FormatTUR); a TUR
// below the minimum (low) is rounded down.
func turText(v float64, low bool) string {
	if v <= 0 || math.IsNaN(v) {
		return "unknown"
	}
	return units.FormatTUR(v, low)
}
