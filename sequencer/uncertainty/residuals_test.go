package uncertainty_test

import (
	"math"
	"testing"

	"trimline/sequencer/uncertainty"
)

// The residual option reproduces JCGM 100 H.3 when the instruments add nothing:
// the thermometer calibration, b = y1 + y2·(t − t0), t0 = 20 °C.
func TestFitLineResidualsGUMH3(t *testing.T) {
	x, y := readTable(t, "gum-h3-thermometer.csv")
	f, s, err := uncertainty.FitLineResiduals(uncertainty.Sweep{X: x, Y: y, X0: 20})
	if err != nil {
		t.Fatal(err)
	}
	checkH3Published(t, f, s)
	if f.DOFB0 != 9 || f.DOFB1 != 9 { // source: JCGM 100 H.3.3, ν = n − 2 = 9
		t.Errorf("dof b0 %v, b1 %v; want 9", f.DOFB0, f.DOFB1)
	}
	if len(f.Budget) != 5 || f.Budget[0].Name != uncertainty.NameResidualScatter {
		t.Fatalf("budget %+v", f.Budget)
	}
	if f.CovSys != ([2][2]float64{}) {
		t.Errorf("CovSys = %v without specs, want 0", f.CovSys)
	}
}

// With instruments, the systematic part is FitLine's for the same line (equal
// weights give the same line), added to the H.3 random part; the readings'
// own Type A and resolution do not enter.
func TestFitLineResidualsAddsSpecs(t *testing.T) {
	s := realisticSweep()
	for i := range s.URandom {
		s.URandom[i] = 2e-6 // equal weights: FitLine's line is the least-squares one
	}
	s.Y[4] += 80e-6 // a bend the readings' noise does not explain
	r, sd, err := uncertainty.FitLineResiduals(s)
	if err != nil {
		t.Fatal(err)
	}
	w, err := uncertainty.FitLine(s)
	if err != nil {
		t.Fatal(err)
	}
	ls, sdLS, err := uncertainty.FitLineLS(s.X, s.Y, s.X0)
	if err != nil {
		t.Fatal(err)
	}
	checkRel(t, "b0 vs FitLine", r.B0, w.B0, 1e-12)
	checkRel(t, "s vs FitLineLS", sd, sdLS, 0)
	for j := range 2 {
		for k := range 2 {
			checkRel(t, "CovSys vs FitLine", r.CovSys[j][k], w.CovSys[j][k], 1e-12)
			checkRel(t, "CovRandom vs FitLineLS", r.CovRandom[j][k], ls.CovRandom[j][k], 0)
			checkRel(t, "Cov = random + sys", r.Cov[j][k], ls.CovRandom[j][k]+w.CovSys[j][k], 1e-12)
		}
	}
	if !(sd > 10*s.URandom[0]) {
		t.Fatalf("s = %g: the bend should dominate the 2 µV readings", sd)
	}
	// JCGM 100 §5.1.2 with independent inputs: u²(b0) = Σ rows².
	uc, _ := uncertainty.Combine(r.Budget)
	checkRel(t, "Combine(Budget) vs sqrt(Cov00)", uc, math.Sqrt(r.Cov[0][0]), 1e-9)
	// The dof: the scatter's 9 against the infinite dof of the specs (JCGM 100
	// G.4.1): at least 9.
	if !(r.DOFB0 >= 9) {
		t.Errorf("dof b0 = %v, want ≥ 9", r.DOFB0)
	}
}
