package uncertainty_test

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mathext"
	"gonum.org/v1/gonum/stat/distuv"

	"trimline/sequencer/fit"
	"trimline/sequencer/uncertainty"
)

// fitted returns the ordinary least-squares polynomial of the given order
// evaluated at every x.
func fitted(t *testing.T, x, y []float64, order int) (yhat []float64, rss float64) {
	t.Helper()
	r, err := fit.Poly(x, y, order, 0)
	if err != nil {
		t.Fatal(err)
	}
	for _, xi := range x {
		yhat = append(yhat, r.Predict(xi))
	}
	return yhat, r.RSS
}

// fUpper is the upper tail of F(d1, d2) at f through the regularised
// incomplete beta function, P(F > f) = I_{d2/(d2+d1·f)}(d2/2, d1/2)
// (Abramowitz & Stegun 26.6.2), a path independent of distuv.F.
func fUpper(f float64, d1, d2 int) float64 {
	a, b := float64(d2)/2, float64(d1)/2
	return mathext.RegIncBeta(a, b, float64(d2)/(float64(d2)+float64(d1)*f))
}

// TestLackOfFitLoadCellLine: the straight line through the load cell data
// fails the lack-of-fit test, as the e-Handbook shows.
func TestLackOfFitLoadCellLine(t *testing.T) {
	x, y := loadCell(t)
	yhat, _ := fitted(t, x, y, 1)
	lof, err := uncertainty.LackOfFit(x, y, nil, yhat, 2)
	if err != nil {
		t.Fatal(err)
	}
	if lof.Method != uncertainty.LOFF || lof.DOF1 != 18 || lof.DOF2 != 20 || lof.Levels != 20 {
		// source: e-Handbook §4.6.1.5, critical value F_{0.05,18,20}: dof 18 and 20
		t.Errorf("got %+v; want method F with dof 18, 20 and 20 levels", lof)
	}
	// source: NIST/SEMATECH e-Handbook §4.6.1.5 (pmd615.htm), "Lack-of-fit F
	// statistic = 214.7464". The page's figures carry about six significant
	// digits: its residual SD 0.0021712694 differs from the exact
	// 0.00217127260 by 1.5e-6 relative, so the F is checked to 5e-6.
	checkRel(t, "F vs e-Handbook", lof.Statistic, 214.7464, 5e-6)
	// Worked for this test with exact rational arithmetic from the same
	// data (least-squares line, SS_PE over the 20 pairs): F = 214.746923653909.
	checkRel(t, "F exact", lof.Statistic, 214.746923653909, 1e-9)
	// source: e-Handbook §4.6.1.5, "Lack-of-fit critical value, F_{0.05,18,20} = 2.15"
	checkPublished(t, "F(0.95; 18, 20)", distuv.F{D1: 18, D2: 20}.Quantile(0.95), 2.15, 2)
	if !(lof.P < 1e-15) {
		t.Errorf("P = %g; the e-Handbook rejects the line far beyond 0.05", lof.P)
	}
}

// TestLackOfFitLoadCellQuadratic: the quadratic fits (the e-Handbook's
// §4.6.1.8–9 conclusion). The statistic is checked against one worked
// independently here, not against a published value: with two readings per
// load, SS_PE = Σ(y_a − y_b)²/2 over the pairs, SS_LOF = RSS − SS_PE
// (hand-worked identities), and P through the incomplete beta function.
func TestLackOfFitLoadCellQuadratic(t *testing.T) {
	x, y := loadCell(t)
	yhat, rss := fitted(t, x, y, 2)
	lof, err := uncertainty.LackOfFit(x, y, nil, yhat, 3)
	if err != nil {
		t.Fatal(err)
	}
	var ssPE float64
	for i := range 20 { // point i and i+20 are the two runs at one load
		if x[i] != x[i+20] {
			t.Fatalf("x[%d] = %v, x[%d] = %v; expected the two runs in order", i, x[i], i+20, x[i+20])
		}
		d := y[i] - y[i+20]
		ssPE += d * d / 2
	}
	want := ((rss - ssPE) / 17) / (ssPE / 20)
	if lof.Method != uncertainty.LOFF || lof.DOF1 != 17 || lof.DOF2 != 20 {
		t.Errorf("got %+v; want method F with dof 17, 20", lof)
	}
	checkRel(t, "F", lof.Statistic, want, 1e-6)
	checkRel(t, "SS_PE", lof.SSPE, ssPE, 1e-6)                   // source: hand-worked pair identity above
	checkRel(t, "SS_LOF", lof.SSLOF, rss-ssPE, 1e-6)             // source: e-Handbook §4.4.4, SS_resid = SS_LOF + SS_PE
	checkRel(t, "P", lof.P, fUpper(lof.Statistic, 17, 20), 1e-9) // cross-check: gonum mathext.RegIncBeta
	if !(lof.P > 0.05) {
		t.Errorf("P = %g; the quadratic should pass at 0.05 (e-Handbook §4.6.1)", lof.P)
	}
}

// TestLackOfFitChi2 is a hand-worked example: five distinct levels, so no
// pure error, residuals (0.5, −1, 0.2, 1.5, −0.7) with u = (1, 1, 0.5, 1, 1) give
// χ² = 0.25 + 1 + 0.16 + 2.25 + 0.49 = 4.15 with ν = 5 − 2 = 3. For three
// dof the upper tail has the closed form Q = erfc(√(χ²/2)) +
// √(2χ²/π)·e^(−χ²/2) (hand-worked from the χ²(3) density), ≈ 0.2457; it is
// also checked against gonum's regularised gamma function.
func TestLackOfFitChi2(t *testing.T) {
	x := []float64{0, 1, 2, 3, 4}
	yhat := []float64{1, 3, 5, 7, 9}
	u := []float64{1, 1, 0.5, 1, 1}
	r := []float64{0.5, -1, 0.2, 1.5, -0.7} // point 2: 0.4 in units of its u
	y := make([]float64, 5)
	for i := range y {
		y[i] = yhat[i] + r[i]
	}
	lof, err := uncertainty.LackOfFit(x, y, u, yhat, 2)
	if err != nil {
		t.Fatal(err)
	}
	const chi2 = 4.15
	if lof.Method != uncertainty.LOFChi2 || lof.DOF1 != 3 || lof.DOF2 != 0 || lof.Levels != 5 {
		t.Errorf("got %+v; want chi2 with ν = 3", lof)
	}
	checkRel(t, "χ²/ν", lof.Statistic, chi2/3, 1e-12)
	q := math.Erfc(math.Sqrt(chi2/2)) + math.Sqrt(2*chi2/math.Pi)*math.Exp(-chi2/2)
	checkRel(t, "P closed form", lof.P, q, 1e-12)
	checkRel(t, "P gonum", lof.P, mathext.GammaIncRegComp(1.5, chi2/2), 1e-12) // cross-check: gonum mathext
}

// TestLackOfFitChoice covers the decision between the tests.
func TestLackOfFitChoice(t *testing.T) {
	x := []float64{1, 1, 2, 3, 4}
	yhat := []float64{1, 1, 2, 3, 4}
	u := []float64{0.1, 0.1, 0.1, 0.1, 0.1}

	// A repeated level with scatter: F, even when u is given.
	y := []float64{1.1, 0.9, 2.05, 2.9, 4.1}
	lof, err := uncertainty.LackOfFit(x, y, u, yhat, 2)
	if err != nil || lof.Method != uncertainty.LOFF || lof.DOF1 != 2 || lof.DOF2 != 1 {
		t.Errorf("replicates: %+v, %v; want F with dof 2, 1", lof, err)
	}
	// Replicates without scatter leave no pure error: χ² with u ...
	y = []float64{1, 1, 2.05, 2.9, 4.1}
	lof, err = uncertainty.LackOfFit(x, y, u, yhat, 2)
	if err != nil || lof.Method != uncertainty.LOFChi2 || lof.DOF1 != 3 {
		t.Errorf("no scatter, u: %+v, %v; want chi2 with ν = 3", lof, err)
	}
	// ... and no test without u.
	if _, err := uncertainty.LackOfFit(x, y, nil, yhat, 2); !errors.Is(err, uncertainty.ErrNoLackOfFitTest) {
		t.Errorf("no scatter, no u: %v; want ErrNoLackOfFitTest", err)
	}
	// As many levels as parameters: no lack-of-fit dof, so χ².
	x3 := []float64{1, 1, 2, 2, 3, 3}
	y3 := []float64{1, 1.1, 2, 2.1, 3, 3.1}
	u3 := []float64{0.1, 0.1, 0.1, 0.1, 0.1, 0.1}
	lof, err = uncertainty.LackOfFit(x3, y3, u3, y3, 3)
	if err != nil || lof.Method != uncertainty.LOFChi2 || lof.DOF1 != 3 {
		t.Errorf("saturated levels: %+v, %v; want chi2 with ν = 3", lof, err)
	}
	// n ≤ params.
	if _, err := uncertainty.LackOfFit(x[:2], y[:2], u[:2], yhat[:2], 2); !errors.Is(err, uncertainty.ErrNoLackOfFitTest) {
		t.Errorf("n = params: %v; want ErrNoLackOfFitTest", err)
	}
	// Invalid input.
	for name, c := range map[string]struct {
		x, y, u, f []float64
		p          int
	}{
		"short y":  {x, y[:4], u, yhat, 2},
		"short u":  {x, y, u[:4], yhat, 2},
		"params 0": {x, y, u, yhat, 0},
		"NaN y":    {x, []float64{1, math.NaN(), 2, 3, 4}, u, yhat, 2},
		"zero u":   {x, y, []float64{0.1, 0, 0.1, 0.1, 0.1}, yhat, 2},
	} {
		if _, err := uncertainty.LackOfFit(c.x, c.y, c.u, c.f, c.p); !errors.Is(err, uncertainty.ErrInvalidInput) {
			t.Errorf("%s: %v; want ErrInvalidInput", name, err)
		}
	}
}

// TestLackOfFitPermutation: the result does not depend on the order of the
// points (property test).
func TestLackOfFitPermutation(t *testing.T) {
	x, y := loadCell(t)
	yhat, _ := fitted(t, x, y, 2)
	u := make([]float64, len(x))
	for i := range u {
		u[i] = 2e-4
	}
	want, err := uncertainty.LackOfFit(x, y, nil, yhat, 3)
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(4, 13))
	for range 20 {
		p := rng.Perm(len(x))
		got, err := uncertainty.LackOfFit(permute(x, p), permute(y, p), permute(u, p), permute(yhat, p), 3)
		if err != nil {
			t.Fatal(err)
		}
		if got.Method != want.Method || got.DOF1 != want.DOF1 || got.DOF2 != want.DOF2 || got.Levels != want.Levels {
			t.Fatalf("permuted: %+v, want %+v", got, want)
		}
		checkRel(t, "F permuted", got.Statistic, want.Statistic, 1e-9)
		checkRel(t, "P permuted", got.P, want.P, 1e-9)
	}
}

// FuzzLackOfFit: any input gives an error or a result with a finite
// non-negative statistic and P in [0, 1]; never a panic.
func FuzzLackOfFit(f *testing.F) {
	f.Add(1.0, 1.0, 2.0, 3.0, 0.1, 1.0, 0.5, 2)
	f.Add(0.0, 0.0, 0.0, 1.0, -1.0, 0.0, 1.0, 1)
	f.Add(1.0, 1.0, 2.0, 1e200, -1e200, 3.0, 1e-200, 2)
	f.Fuzz(func(t *testing.T, x0, x1, x2, y0, y1, y2, u0 float64, params int) {
		x := []float64{x0, x1, x2, x0}
		y := []float64{y0, y1, y2, y0 + y1}
		yhat := []float64{y1, y2, y0, y1}
		u := []float64{u0, u0, 1, 2}
		for _, uu := range [][]float64{nil, u} {
			lof, err := uncertainty.LackOfFit(x, y, uu, yhat, params)
			if err != nil {
				continue
			}
			if !(lof.Statistic >= 0) || math.IsInf(lof.Statistic, 0) || !(lof.P >= 0 && lof.P <= 1) {
				t.Errorf("LackOfFit(%v, %v, %v, %v, %d) = %+v", x, y, uu, yhat, params, lof)
			}
		}
	})
}

// TestLackOfFitOfSweep: with the sweep's own point uncertainties and no
// repeated level, LackOfFit is the fit's Chi2/ResidualDOF (the way the fit
// step uses it).
func TestLackOfFitOfSweep(t *testing.T) {
	s := realisticSweep()
	f, err := uncertainty.FitQuadratic(s)
	if err != nil {
		t.Fatal(err)
	}
	u, err := s.PointU()
	if err != nil {
		t.Fatal(err)
	}
	yhat := make([]float64, len(s.X))
	for i := range yhat {
		yhat[i] = s.Y[i] - f.Residuals[i]
	}
	lof, err := uncertainty.LackOfFit(s.X, s.Y, u, yhat, 3)
	if err != nil {
		t.Fatal(err)
	}
	if lof.Method != uncertainty.LOFChi2 || lof.DOF1 != f.ResidualDOF {
		t.Errorf("got %+v; want chi2 with ν = %d", lof, f.ResidualDOF)
	}
	checkRel(t, "χ²/ν", lof.Statistic, f.Chi2/float64(f.ResidualDOF), 1e-9)
	s.URandom, s.DOFRandom, s.MeterResolution = nil, nil, 0
	if u, err := s.PointU(); u != nil || err != nil {
		t.Errorf("no random part: PointU = %v, %v; want nil, nil", u, err)
	}
}
