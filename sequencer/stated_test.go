package sequencer_test

import (
	"context"
	"fmt"
	"math"
	"testing"

	"trimline/instruments/units"
	"trimline/limits"
	"trimline/sequencer"
)

// From metrology revision 1 on, a result's expanded uncertainty is rounded once,
// where it is made: up to two significant digits (JCGM 100:2008 §7.2.6 allows
// rounding up). The record stores that stated U, and the limits judge with it:
// the guard band w = r·U and the acceptance limits AL = TL ∓ w (ILAC-G8:09/2019
// §4.1) are computed from the U the certificate states.
func TestRecordStoresTheStatedU(t *testing.T) {
	st, seq := demoFiles(t, nil)
	cfg := sequencer.Config{Station: st, Sequence: seq}
	e, err := sequencer.Open(context.Background(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	defer e.Close()
	checked, judged := 0, 0
	for i := 1; i <= 4; i++ {
		rec := e.Run(context.Background(), fmt.Sprintf("BRX-%05d", i))
		if rec.Metrology < 1 {
			t.Fatalf("a new run has metrology revision %d, want ≥ 1", rec.Metrology)
		}
		byName := map[string]sequencer.Result{}
		for _, r := range rec.Results {
			byName[limits.ChannelKey(r.Name, r.Channel)] = r
			U, kU := r.Unc.Expanded, r.Unc.K*r.Unc.Std
			if U == 0 {
				continue
			}
			checked++
			// JCGM 100:2008 §7.2.6, rounded up: two significant digits, never
			// below k·u, and above it by less than one unit of the second digit.
			_, dec := units.RoundU(U)
			// (k·u is compared to 1e-12 relative: for a U from an interval, k = U/u
			// and k·u gives U back only to the last bit.)
			if !units.IsStated(U) || U < kU*(1-1e-12) || U-kU >= math.Pow(10, -float64(dec))*(1+1e-9) {
				t.Errorf("%s %s: U = %v, k·u = %v: want k·u rounded up to two significant digits", rec.Serial, r.Name, U, kU)
			}
		}
		for _, o := range rec.Outcomes {
			d := o.Decision
			if d == nil || d.U == 0 {
				continue
			}
			judged++
			r := byName[limits.ChannelKey(d.Result, o.Channel)]
			// The decision's U is the record's U in the limit's unit: a stated U
			// stays stated through a power-of-ten unit change.
			if !units.IsStated(d.U) || r.Unc.Expanded == 0 {
				t.Errorf("%s limit %q: decision U = %v (record U = %v), want the stated U", rec.Serial, o.Name, d.U, r.Unc.Expanded)
			}
			// ILAC-G8:09/2019 §4.1: w = r·U and AL = TL ∓ w, from the stated U.
			if d.Rule == limits.RuleGuarded && d.Guard != d.GuardFactor*d.U {
				t.Errorf("%s limit %q: w = %v, want r·U = %v·%v (ILAC-G8:09/2019 §4.1)", rec.Serial, o.Name, d.Guard, d.GuardFactor, d.U)
			}
			if d.Upper != nil && *d.AcceptUpper != *d.Upper-d.Guard || d.Lower != nil && *d.AcceptLower != *d.Lower+d.Guard {
				t.Errorf("%s limit %q: AL %v … %v, want TL ∓ w from the stated U (ILAC-G8:09/2019 §4.1)", rec.Serial, o.Name, d.AcceptLower, d.AcceptUpper)
			}
		}
		// A record of revision 0 replays as it was made: k·u, not rounded.
		old := *rec
		old.Metrology = 0
		again, err := sequencer.Replay(cfg, &old)
		if err != nil {
			t.Fatal(err)
		}
		for _, r := range again.Results {
			if r.Unc.Expanded != r.Unc.K*r.Unc.Std {
				t.Errorf("%s %s at revision 0: U = %v, want k·u = %v unrounded", rec.Serial, r.Name, r.Unc.Expanded, r.Unc.K*r.Unc.Std)
			}
		}
	}
	if checked == 0 || judged == 0 {
		t.Fatalf("checked %d uncertainties and %d decisions: the demo units have both", checked, judged)
	}
}
