package uncertainty_test

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"trimline/sequencer/fit"
	"trimline/sequencer/uncertainty"
)

// loadCell reads the load cell calibration data (NIST StRD "Pontius", the
// e-Handbook's §4.6.1 case study): 40 points, 20 loads measured twice.
func loadCell(t *testing.T) (x, y []float64) {
	t.Helper()
	return readTable(t, "nist-loadcell-pontius.csv")
}

// TestFitQuadraticPontius checks the order-2 fit against the NIST StRD
// certified values of "Pontius" (degree 2, lower difficulty). With equal
// unit uncertainties, no resolution and no specs, FitQuadratic is the
// ordinary least-squares quadratic and CovRandom = (XᵀX)⁻¹, so the certified
// standard deviations are s·sqrt(CovRandom[k][k]) with s² = Chi2/ResidualDOF.
func TestFitQuadraticPontius(t *testing.T) {
	x, y := loadCell(t)
	s := uncertainty.Sweep{X: x, Y: y}
	for range x {
		s.URandom = append(s.URandom, 1)
		s.DOFRandom = append(s.DOFRandom, math.Inf(1))
	}
	f, err := uncertainty.FitQuadratic(s)
	if err != nil {
		t.Fatal(err)
	}
	if f.ResidualDOF != 37 { // source: NIST StRD Pontius, residual degrees of freedom 37
		t.Errorf("ResidualDOF = %d, want 37", f.ResidualDOF)
	}
	sd := math.Sqrt(f.Chi2 / float64(f.ResidualDOF))
	// Certified values of NIST StRD Pontius, from memory (15 digits as NIST
	// lists them); the data file is read from the e-Handbook (see testdata).
	checkRel(t, "B0", f.B[0], 0.673565789473684e-03, 1e-9)                             // source: NIST StRD Pontius, from memory
	checkRel(t, "B1", f.B[1], 0.732059160401003e-06, 1e-9)                             // source: NIST StRD Pontius, from memory
	checkRel(t, "B2", f.B[2], -0.316081871345029e-14, 1e-8)                            // source: NIST StRD Pontius, from memory
	checkRel(t, "s(B0)", sd*math.Sqrt(f.CovRandom[0][0]), 0.107938612033077e-03, 1e-8) // source: NIST StRD Pontius, from memory
	checkRel(t, "s(B1)", sd*math.Sqrt(f.CovRandom[1][1]), 0.157817399981659e-09, 1e-8) // source: NIST StRD Pontius, from memory
	checkRel(t, "s(B2)", sd*math.Sqrt(f.CovRandom[2][2]), 0.486652849992036e-16, 1e-8) // source: NIST StRD Pontius, from memory
	checkRel(t, "residual SD", sd, 0.205177424076185e-03, 1e-9)                        // source: NIST StRD Pontius, from memory
	checkRel(t, "RSS", f.Chi2, 0.155761768796992e-05, 1e-8)                            // source: NIST StRD Pontius, from memory

	// Cross-check: gonum's QR least squares on the same design matrix.
	a := mat.NewDense(len(x), 3, nil)
	for i, xi := range x {
		a.SetRow(i, []float64{1, xi, xi * xi})
	}
	var qr mat.QR
	qr.Factorize(a)
	var b mat.VecDense
	if err := qr.SolveVecTo(&b, false, mat.NewVecDense(len(y), y)); err != nil {
		t.Fatal(err)
	}
	for k := range 3 {
		checkRel(t, "B vs gonum QR", f.B[k], b.AtVec(k), 1e-9) // source: gonum mat.QR cross-check
	}
	// No specs: no systematic covariance, and every dof is the points' ∞.
	if f.CovSys != ([3][3]float64{}) || !math.IsInf(f.DOFB0, 1) || !math.IsInf(f.DOFB1, 1) {
		t.Errorf("CovSys %v, DOFB0 %v, DOFB1 %v; want zero and ∞", f.CovSys, f.DOFB0, f.DOFB1)
	}
}

// lineSweep is realisticSweep with an exactly straight transfer, equal
// URandom and x symmetric about X0 = 0, so that the quadratic term comes out
// zero and b1 is uncorrelated with b0 and b2.
func lineSweep() uncertainty.Sweep {
	s := realisticSweep()
	for i, x := range s.X {
		s.Y[i] = 2.5 + 200*x
		s.URandom[i] = 2e-6
	}
	return s
}

// TestFitQuadraticOnLine: when the true curve is a line the quadratic's b0
// and b1 are the line's, its u(b1) is the line's (b1 is orthogonal to the
// even terms for a symmetric sweep), CovSys of (b0, b1) is the line's (b2
// = 0 makes the sensitivities equal), and u(b0) is larger (b0 now shares
// the even part of the data with b2). Hand-worked expectations.
func TestFitQuadraticOnLine(t *testing.T) {
	s := lineSweep()
	l, err := uncertainty.FitLine(s)
	if err != nil {
		t.Fatal(err)
	}
	q, err := uncertainty.FitQuadratic(s)
	if err != nil {
		t.Fatal(err)
	}
	checkAbs(t, "b2", q.B[2], 0, 1e-9)
	checkRel(t, "b0", q.B[0], l.B0, 1e-12)
	checkRel(t, "b1", q.B[1], l.B1, 1e-12)
	checkRel(t, "CovRandom b1", q.CovRandom[1][1], l.CovRandom[1][1], 1e-9)
	for j := range 2 {
		for k := range 2 {
			checkAbs(t, "CovSys", q.CovSys[j][k], l.CovSys[j][k], 1e-9*math.Sqrt(l.CovSys[j][j]*l.CovSys[k][k]))
		}
	}
	ul0, ul1 := l.StdUnc()
	uq := q.StdUnc()
	checkRel(t, "u(b1)", uq[1], ul1, 1e-6)
	if !(uq[0] > ul0) {
		t.Errorf("u(b0) quadratic %g ≤ line %g", uq[0], ul0)
	}
	// The engine's use: u and dof of the offset b0 and of the gain b1.
	u, dof := q.Linear([3]float64{1, 0, 0})
	checkRel(t, "Linear(b0)", u, uq[0], 1e-12)
	if dof != q.DOFB0 || !(dof > 0) {
		t.Errorf("Linear(b0) dof %v, DOFB0 %v", dof, q.DOFB0)
	}
	_, dl := l.Linear([2]float64{0, 1})
	_, dq := q.Linear([3]float64{0, 1, 0})
	checkRel(t, "dof(b1)", dq, dl, 1e-6)
}

// TestFitQuadraticCovSysMonteCarlo draws the four systematic errors
// (rectangular within the specs, as MonteCarlo does), corrects the data with
// them exactly, refits with FitQuadratic's weights and compares the sample
// covariance of (b0, b1, b2) with CovSys. The sweep has strong curvature and
// an off-centre X0 so that every sensitivity term matters; the specs are
// large so that the systematic part dominates. Sampling error of a
// covariance over M draws is about sqrt(2/M) of the scale (JCGM 101 §7.9
// practice); the bound is 5 times that. Deterministic seed.
func TestFitQuadraticCovSysMonteCarlo(t *testing.T) {
	s := uncertainty.Sweep{
		Meter:  uncertainty.Spec{OfReading: 2e-3, OfRange: 1e-3, Range: 10},
		Source: uncertainty.Spec{OfReading: 3e-3, OfRange: 2e-3, Range: 1},
		X0:     0.3,
	}
	for i := range 9 {
		x := -0.8 + 0.2*float64(i)
		s.X = append(s.X, x)
		s.Y = append(s.Y, 1.2+4*(x-0.3)-2.5*(x-0.3)*(x-0.3))
		s.URandom = append(s.URandom, 1e-4*(1+0.1*float64(i)))
		s.DOFRandom = append(s.DOFRandom, 9)
	}
	f, err := uncertainty.FitQuadratic(s)
	if err != nil {
		t.Fatal(err)
	}
	const trials = 20000
	rng := rand.New(rand.NewPCG(13, 2))
	rect := func(a float64) float64 { return a * (2*rng.Float64() - 1) }
	n := len(s.X)
	xc, yc := make([]float64, n), make([]float64, n)
	var sum [3]float64
	var sum2 [3][3]float64
	for range trials {
		gm, om := rect(s.Meter.OfReading), rect(s.Meter.OfRange*s.Meter.Range)
		gs, os := rect(s.Source.OfReading), rect(s.Source.OfRange*s.Source.Range)
		for i := range n {
			xc[i] = s.X[i]*(1+gs) + os
			yc[i] = (s.Y[i] - om) / (1 + gm)
		}
		r, err := fit.Weighted(xc, yc, s.URandom, 2, s.X0, true)
		if err != nil {
			t.Fatal(err)
		}
		for j := range 3 {
			d := r.Coef[j] - f.B[j]
			sum[j] += d
			for k := range 3 {
				sum2[j][k] += d * (r.Coef[k] - f.B[k])
			}
		}
	}
	tol := 5 * math.Sqrt(2.0/trials)
	for j := range 3 {
		for k := range 3 {
			mc := (sum2[j][k] - sum[j]*sum[k]/trials) / (trials - 1)
			scale := math.Sqrt(f.CovSys[j][j] * f.CovSys[k][k])
			if d := math.Abs(mc-f.CovSys[j][k]) / scale; !(d <= tol) {
				t.Errorf("CovSys[%d][%d] = %.6g, Monte Carlo %.6g (difference %.3g of scale > %.3g)", j, k, f.CovSys[j][k], mc, d, tol)
			}
		}
	}
}

// TestFitQuadraticPermutation: the fit does not depend on the order of the
// points (property test; the residuals follow their points).
func TestFitQuadraticPermutation(t *testing.T) {
	s := realisticSweep()
	for i, x := range s.X {
		s.Y[i] += 50 * x * x
	}
	f, err := uncertainty.FitQuadratic(s)
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(1, 13))
	for range 20 {
		p := rng.Perm(len(s.X))
		q := s
		q.X, q.Y, q.URandom, q.DOFRandom = permute(s.X, p), permute(s.Y, p), permute(s.URandom, p), permute(s.DOFRandom, p)
		g, err := uncertainty.FitQuadratic(q)
		if err != nil {
			t.Fatal(err)
		}
		u, v := f.StdUnc(), g.StdUnc()
		for k := range 3 {
			checkRel(t, "b", g.B[k], f.B[k], 1e-10)
			checkRel(t, "u(b)", v[k], u[k], 1e-9)
		}
		checkRel(t, "DOFB0", g.DOFB0, f.DOFB0, 1e-9)
		checkRel(t, "Chi2", g.Chi2, f.Chi2, 1e-7)
		for i, pi := range p {
			checkAbs(t, "residual", g.Residuals[i], f.Residuals[pi], 1e-12)
		}
	}
}

func permute(v []float64, p []int) []float64 {
	out := make([]float64, len(p))
	for i, pi := range p {
		out[i] = v[pi]
	}
	return out
}

// TestQuadFitBudget: the budget rows combine to Linear's u and dof, Predict
// at X0 is b0 and the zero-uncertainty sweep gives the OLS quadratic with
// Chi2 NaN.
func TestQuadFitBudget(t *testing.T) {
	s := realisticSweep()
	f, err := uncertainty.FitQuadratic(s)
	if err != nil {
		t.Fatal(err)
	}
	for _, g := range [][3]float64{{1, 0, 0}, {0, 1, 0}, {0, 0, 1}, {1, 0.01, 1e-4}} {
		u, dof := f.Linear(g)
		b := f.LinearBudget(g)
		if len(b) != 6 {
			t.Fatalf("budget has %d rows, want 6", len(b))
		}
		uc, dc := uncertainty.Combine(b)
		checkRel(t, "Combine(budget) u", uc, u, 1e-9)
		checkRel(t, "Combine(budget) dof", dc, dof, 1e-9)
	}
	y, u, dof := f.Predict(s.X0)
	u0, d0 := f.Linear([3]float64{1, 0, 0})
	if y != f.B[0] || u != u0 || dof != d0 {
		t.Errorf("Predict(X0) = %v, %v, %v; want b0 %v, %v, %v", y, u, dof, f.B[0], u0, d0)
	}
	x := 7e-3
	_, u = func() (float64, float64) { y, u, _ := f.Predict(x); return y, u }()
	tt := x - f.X0
	cov := [][]float64{f.Cov[0][:], f.Cov[1][:], f.Cov[2][:]}
	checkRel(t, "Predict u", u, uncertainty.LinearCombination([]float64{1, tt, tt * tt}, cov), 1e-12)

	s.URandom, s.DOFRandom, s.MeterResolution = nil, nil, 0
	f, err = uncertainty.FitQuadratic(s)
	if err != nil {
		t.Fatal(err)
	}
	r, err := fit.Poly(s.X, s.Y, 2, s.X0)
	if err != nil {
		t.Fatal(err)
	}
	for k := range 3 {
		checkRel(t, "OLS b", f.B[k], r.Coef[k], 1e-12)
	}
	if !math.IsNaN(f.Chi2) || f.CovRandom != ([3][3]float64{}) {
		t.Errorf("no random part: Chi2 %v, CovRandom %v; want NaN and zero", f.Chi2, f.CovRandom)
	}
}

func TestFitQuadraticErrors(t *testing.T) {
	s := realisticSweep()
	s.X, s.Y, s.URandom, s.DOFRandom = s.X[:2], s.Y[:2], s.URandom[:2], s.DOFRandom[:2]
	if _, err := uncertainty.FitQuadratic(s); !errors.Is(err, fit.ErrTooFewPoints) {
		t.Errorf("2 points: %v, want fit.ErrTooFewPoints", err)
	}
	s = realisticSweep()
	for i := range s.X {
		s.X[i] = float64(i % 2)
	}
	if _, err := uncertainty.FitQuadratic(s); !errors.Is(err, fit.ErrSingular) {
		t.Errorf("2 distinct x: %v, want fit.ErrSingular", err)
	}
	s = realisticSweep()
	s.URandom[3] = 0
	s.MeterResolution = 0
	if _, err := uncertainty.FitQuadratic(s); !errors.Is(err, uncertainty.ErrInvalidInput) {
		t.Errorf("one zero u: %v, want ErrInvalidInput", err)
	}
	s = realisticSweep()
	s.Y = s.Y[1:]
	if _, err := uncertainty.FitQuadratic(s); !errors.Is(err, uncertainty.ErrInvalidInput) {
		t.Errorf("short Y: %v, want ErrInvalidInput", err)
	}
}
