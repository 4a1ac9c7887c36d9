package uncertainty_test

import (
	"errors"
	"math"
	"testing"

	"trimline/sequencer/fit"
	"trimline/sequencer/uncertainty"
)

// realisticSweep is an 11-point sweep of a ×200 amplifier with a 2.5 V
// output offset: x from −10 mV to +10 mV in 2 mV steps, y = 2.5 + 200·x plus
// a deterministic ±1 µV wiggle, URandom 1.8…2.2 µV (10 readings, ν = 9),
// a meter of ±(30 ppm of reading + 4 ppm of 10 V) with 1 µV resolution and a
// source of ±(20 ppm of reading + 5 ppm of 100 mV).
func realisticSweep() uncertainty.Sweep {
	s := uncertainty.Sweep{
		Meter:           uncertainty.Spec{OfReading: 30e-6, OfRange: 4e-6, Range: 10},
		MeterResolution: 1e-6,
		Source:          uncertainty.Spec{OfReading: 20e-6, OfRange: 5e-6, Range: 0.1},
	}
	for i := range 11 {
		x := -10e-3 + 2e-3*float64(i)
		s.X = append(s.X, x)
		s.Y = append(s.Y, 2.5+200*x+1e-6*math.Sin(float64(3*i)))
		s.URandom = append(s.URandom, 2e-6*(0.9+0.02*float64(i)))
		s.DOFRandom = append(s.DOFRandom, 9)
	}
	return s
}

func covSlice(c [2][2]float64) [][]float64 {
	return [][]float64{{c[0][0], c[0][1]}, {c[1][0], c[1][1]}}
}

// checkH3Published checks a line fitted to the GUM H.3 thermometer data, and
// its residual standard deviation s, against the published results.
func checkH3Published(t *testing.T, f uncertainty.LineFit, s float64) {
	t.Helper()
	u0, u1 := f.StdUnc()
	b30, u30 := f.Predict(30)
	checkPublished(t, "y1 / °C", f.B0, -0.1712, 4)        // source: JCGM 100:2008 H.3.3, y1 = −0.1712 °C
	checkPublished(t, "y2", f.B1, 0.00218, 5)             // source: JCGM 100:2008 H.3.3, y2 = 0.00218
	checkPublished(t, "s(y1) / °C", u0, 0.0029, 4)        // source: JCGM 100:2008 H.3.3, s(y1) = 0.0029 °C
	checkPublished(t, "s(y2)", u1, 0.00067, 5)            // source: JCGM 100:2008 H.3.3, s(y2) = 0.00067
	checkPublished(t, "r(y1, y2)", f.Corr(), -0.930, 3)   // source: JCGM 100:2008 H.3.3, r(y1, y2) = −0.930
	checkPublished(t, "s / °C", s, 0.0035, 4)             // source: JCGM 100:2008 H.3.3, s = 0.0035 °C
	checkPublished(t, "b(30 °C) / °C", b30, -0.1494, 4)   // source: JCGM 100:2008 H.3.4, b(30 °C) = −0.1494 °C
	checkPublished(t, "u(b(30 °C)) / °C", u30, 0.0041, 4) // source: JCGM 100:2008 H.3.4, u[b(30 °C)] = 0.0041 °C
}

func TestGUMH3(t *testing.T) {
	x, y := readTable(t, "gum-h3-thermometer.csv")
	f, s, err := uncertainty.FitLineLS(x, y, 20) // b = y1 + y2·(t − t0), t0 = 20 °C, JCGM 100 H.3 eq. (H.12)
	if err != nil {
		t.Fatal(err)
	}
	checkH3Published(t, f, s)
	u0, u1 := f.StdUnc()
	b30, u30 := f.Predict(30)
	checkRel(t, "b(30 °C) recomputed", b30, -0.149377, 1e-4)    // source: recomputed from JCGM 100 Table H.6 data
	checkRel(t, "u(b(30 °C)) recomputed", u30, 0.0041386, 1e-4) // source: recomputed from JCGM 100 Table H.6 data
	if f.DOFB0 != 9 || f.DOFB1 != 9 || f.ResidualDOF != 9 {     // source: JCGM 100 H.3.3, ν = n − 2 = 9
		t.Errorf("DOF b0 %v, b1 %v, residual %d; want 9", f.DOFB0, f.DOFB1, f.ResidualDOF)
	}
	if _, _, dof := f.PredictDOF(30); dof != 9 { // pooled s: one estimate, 9 dof, not Welch–Satterthwaite over points
		t.Errorf("PredictDOF(30) dof = %v, want 9", dof)
	}
	// JCGM 100 H.3.4 eq. (H.15): u²(b) = u²(y1) + θ²u²(y2) + 2θ·u(y1)u(y2)r(y1,y2), θ = t − t0.
	th := 10.0
	checkRel(t, "u(b(30)) by (H.15)", u30, math.Sqrt(u0*u0+th*th*u1*u1+2*th*u0*u1*f.Corr()), 1e-12)
	// The budget is one row that combines to u(y1).
	if len(f.Budget) != 1 || f.Budget[0].Name != uncertainty.NameResidualScatter {
		t.Fatalf("budget %+v", f.Budget)
	}
	uc, dof := uncertainty.Combine(f.Budget)
	checkRel(t, "Combine(Budget)", uc, u0, 1e-12)
	checkRel(t, "Combine(Budget) dof", dof, 9, 0)

	// Cross-check against fit.Poly/PredictU and LinearCombination on the same data.
	r, err := fit.Poly(x, y, 1, 20)
	if err != nil {
		t.Fatal(err)
	}
	for _, xv := range []float64{15, 21.5, 24, 30} {
		yf, uf := r.PredictU(xv)
		yl, ul := f.Predict(xv)
		checkRel(t, "Predict y vs fit.PredictU", yl, yf, 1e-13)
		checkRel(t, "Predict u vs fit.PredictU", ul, uf, 1e-12)
		checkRel(t, "LinearCombination vs fit.PredictU", uncertainty.LinearCombination([]float64{1, xv - 20}, r.Cov), uf, 1e-12)
	}

	// The same data through FitLine with a common arbitrary URandom and no
	// systematics: equal weights give the same line, and the covariance is
	// the residual one rescaled by (s/URandom)².
	const c = 0.01
	sw := uncertainty.Sweep{X: x, Y: y, X0: 20}
	for range x {
		sw.URandom = append(sw.URandom, c)
		sw.DOFRandom = append(sw.DOFRandom, 5)
	}
	g, err := uncertainty.FitLine(sw)
	if err != nil {
		t.Fatal(err)
	}
	checkRel(t, "FitLine B0", g.B0, f.B0, 1e-13)
	checkRel(t, "FitLine B1", g.B1, f.B1, 1e-12)
	for i := range 2 {
		for j := range 2 {
			checkRel(t, "FitLine Cov·(s/c)²", g.Cov[i][j]*(s/c)*(s/c), f.Cov[i][j], 1e-12)
			if g.CovSys[i][j] != 0 {
				t.Errorf("CovSys[%d][%d] = %v with zero specs", i, j, g.CovSys[i][j])
			}
		}
	}
	checkRel(t, "Chi2 = RSS/c²", g.Chi2, s*s*9/(c*c), 1e-12)
}

// TestSystematicSensitivities checks the analytic sensitivities and CovSys
// against finite differences of refitting corrected data (package doc).
func TestSystematicSensitivities(t *testing.T) {
	s := uncertainty.Sweep{
		X0:     0.5, // off zero so that the source gain reaches b0 (−b1·X0)
		Meter:  uncertainty.Spec{OfReading: 50e-6, OfRange: 10e-6, Range: 10},
		Source: uncertainty.Spec{OfReading: 20e-6, OfRange: 5e-6, Range: 1},
	}
	for i := range 11 {
		x := 0.1 * float64(i)
		s.X = append(s.X, x)
		s.Y = append(s.Y, 0.3+2*x) // zero random error: exactly on the line
	}
	f, err := uncertainty.FitLine(s)
	if err != nil {
		t.Fatal(err)
	}
	checkRel(t, "b0 at X0", f.B0, 1.3, 1e-14)
	checkRel(t, "b1", f.B1, 2, 1e-14)
	if f.CovRandom != [2][2]float64{} || !math.IsNaN(f.Chi2) {
		t.Errorf("no random uncertainty: CovRandom %v, Chi2 %v; want zero, NaN", f.CovRandom, f.Chi2)
	}

	// Hand check (data view): a meter that reads y·(1+g) makes the fit return
	// exactly b1·(1+g) and b0·(1+g) (least squares is linear in y).
	const g = 1e-3
	yy := make([]float64, len(s.Y))
	for i, v := range s.Y {
		yy[i] = v * (1 + g)
	}
	r, err := fit.Poly(s.X, yy, 1, s.X0)
	if err != nil {
		t.Fatal(err)
	}
	checkRel(t, "Δb1 for meter gain g", r.Coef[1]-f.B1, f.B1*g, 1e-9) // source: hand check, Δb1 = b1·g
	checkRel(t, "Δb0 for meter gain g", r.Coef[0]-f.B0, f.B0*g, 1e-9) // source: hand check, Δb0 = b0·g

	// refit returns (β0, β1) fitted to the data corrected for one error e
	// of the named kind: η = (y − o_m)/(1+g_m), ξ = x(1+g_s) + o_s.
	refit := func(name string, e float64) [2]float64 {
		var gm, om, gs, os float64
		switch name {
		case uncertainty.NameMeterGain:
			gm = e
		case uncertainty.NameMeterOffset:
			om = e
		case uncertainty.NameSourceGain:
			gs = e
		case uncertainty.NameSourceOffset:
			os = e
		}
		xc, yc := make([]float64, len(s.X)), make([]float64, len(s.X))
		for i := range s.X {
			xc[i] = s.X[i]*(1+gs) + os
			yc[i] = (s.Y[i] - om) / (1 + gm)
		}
		r, err := fit.Poly(xc, yc, 1, s.X0)
		if err != nil {
			t.Fatal(err)
		}
		return [2]float64{r.Coef[0], r.Coef[1]}
	}
	var covFD [2][2]float64
	seen := 0
	for _, in := range f.Inputs {
		if in.Point >= 0 {
			t.Errorf("unexpected per-point input %+v without random uncertainty", in)
			continue
		}
		seen++
		h := in.U * math.Sqrt(3) // the half-width: large enough for good differences, small enough for linearity
		p, m := refit(in.Name, h), refit(in.Name, -h)
		var jac [2]float64
		for k := range 2 {
			jac[k] = (p[k] - m[k]) / (2 * h)
			if in.C[k] == 0 {
				checkAbs(t, in.Name+" sensitivity (zero)", jac[k], 0, 1e-9)
			} else {
				checkRel(t, in.Name+" sensitivity", jac[k], in.C[k], 1e-6)
			}
		}
		for j := range 2 {
			for k := range 2 {
				covFD[j][k] += jac[j] * jac[k] * in.U * in.U
			}
		}
	}
	if seen != 4 {
		t.Fatalf("%d systematic inputs, want 4", seen)
	}
	for j := range 2 {
		for k := range 2 {
			checkRel(t, "CovSys vs finite differences", f.CovSys[j][k], covFD[j][k], 1e-6)
		}
	}
	// The expected sensitivities in closed form (package doc).
	want := map[string][2]float64{
		uncertainty.NameMeterGain:    {-1.3, -2},
		uncertainty.NameMeterOffset:  {-1, 0},
		uncertainty.NameSourceGain:   {-2 * 0.5, -2},
		uncertainty.NameSourceOffset: {-2, 0},
	}
	for _, in := range f.Inputs {
		if w, ok := want[in.Name]; ok {
			checkAbs(t, in.Name+" C[0]", in.C[0], w[0], 1e-13)
			checkAbs(t, in.Name+" C[1]", in.C[1], w[1], 1e-13)
		}
	}
	// Hand value of u²(b1): (b1·50e-6)²/3 + (b1·20e-6)²/3 = 4·(2500+400)e-12/3.
	checkRel(t, "CovSys[1][1]", f.CovSys[1][1], 4*2900e-12/3, 1e-12)
}

func TestRealisticBudget(t *testing.T) {
	s := realisticSweep()
	f, err := uncertainty.FitLine(s)
	if err != nil {
		t.Fatal(err)
	}
	u0, u1 := f.StdUnc()
	t.Logf("b0 = %.7f V u %.3g µV ν %.4g; b1 = %.6f u %.3g ppm ν %.4g; r = %.3f; χ² = %.2f (ν %d)",
		f.B0, u0*1e6, f.DOFB0, f.B1, u1/f.B1*1e6, f.DOFB1, f.Corr(), f.Chi2, f.ResidualDOF)
	for i, c := range f.Budget {
		t.Logf("  %-17s u(b0) %9.3g V  ν %-8.4g | u(b1) %9.3g  ν %.4g", c.Name, c.U, c.DOF, f.BudgetB1[i].U, f.BudgetB1[i].DOF)
	}
	names := []string{uncertainty.NameRepeatability, uncertainty.NameResolution, uncertainty.NameMeterGain,
		uncertainty.NameMeterOffset, uncertainty.NameSourceGain, uncertainty.NameSourceOffset}
	if len(f.Budget) != 6 || len(f.BudgetB1) != 6 {
		t.Fatalf("budget rows %d/%d, want 6", len(f.Budget), len(f.BudgetB1))
	}
	for i, n := range names {
		if f.Budget[i].Name != n || f.BudgetB1[i].Name != n {
			t.Errorf("row %d: %q/%q, want %q", i, f.Budget[i].Name, f.BudgetB1[i].Name, n)
		}
	}
	// Budget and covariance agree.
	uc, dof := uncertainty.Combine(f.Budget)
	checkRel(t, "Combine(Budget) vs sqrt(Cov00)", uc, u0, 1e-10)
	checkRel(t, "Combine(Budget) dof vs DOFB0", dof, f.DOFB0, 0)
	uc, _ = uncertainty.Combine(f.BudgetB1)
	checkRel(t, "Combine(BudgetB1) vs sqrt(Cov11)", uc, u1, 1e-10)
	// The per-point inputs rebuild CovRandom = (XᵀWX)⁻¹ of the QR fit.
	var cr [2][2]float64
	for _, in := range f.Inputs {
		if in.Point >= 0 {
			for j := range 2 {
				for k := range 2 {
					cr[j][k] += in.C[j] * in.C[k] * in.U * in.U
				}
			}
		}
	}
	for j := range 2 {
		for k := range 2 {
			checkRel(t, "Σ a aᵀ u² vs CovRandom", cr[j][k], f.CovRandom[j][k], 1e-9)
		}
	}
	// Hand values of the systematic rows (b0 = 2.5 V, b1 = 200, X0 = 0).
	checkRel(t, "meter gain u(b0)", f.Budget[2].U, f.B0*30e-6/math.Sqrt(3), 1e-12)
	checkRel(t, "meter offset u(b0)", f.Budget[3].U, 40e-6/math.Sqrt(3), 1e-12)
	checkAbs(t, "source gain u(b0), X0 = 0", f.Budget[4].U, 0, 0)
	checkRel(t, "source offset u(b0)", f.Budget[5].U, f.B1*0.5e-6/math.Sqrt(3), 1e-12)
	checkRel(t, "source gain u(b1)", f.BudgetB1[4].U, f.B1*20e-6/math.Sqrt(3), 1e-12)

	// Cross-check Predict / LinearCombination against fit.Result.PredictU of
	// the same weighted fit plus the systematic covariance.
	u := make([]float64, len(s.X))
	for i := range u {
		u[i] = math.Hypot(s.URandom[i], 1e-6/(2*math.Sqrt(3)))
	}
	r, err := fit.Weighted(s.X, s.Y, u, 1, 0, true)
	if err != nil {
		t.Fatal(err)
	}
	for _, xv := range []float64{-10e-3, 0, 3e-3, 12e-3} {
		yf, uf := r.PredictU(xv)
		g := []float64{1, xv}
		checkRel(t, "LinearCombination(CovRandom) vs PredictU", uncertainty.LinearCombination(g, covSlice(f.CovRandom)), uf, 1e-10)
		yl, ul := f.Predict(xv)
		checkRel(t, "Predict y vs PredictU", yl, yf, 1e-14)
		usys := uncertainty.LinearCombination(g, covSlice(f.CovSys))
		checkRel(t, "Predict u² = random² + sys²", ul*ul, uf*uf+usys*usys, 1e-10)
		ulin, dof := f.Linear([2]float64{1, xv})
		checkRel(t, "Linear u vs Predict u", ulin, ul, 0)
		_, _, pdof := f.PredictDOF(xv)
		checkRel(t, "PredictDOF dof", pdof, dof, 0)
		// The meter gain moves the predicted value by −ŷ·g_m: its row equals |ŷ|·a/√3.
		checkRel(t, "meter gain row of ŷ", f.LinearBudget([2]float64{1, xv})[2].U, math.Abs(yl)*30e-6/math.Sqrt(3), 1e-12)
	}
}

// TestRandomDOF checks the Welch–Satterthwaite dof of the random part by hand.
func TestRandomDOF(t *testing.T) {
	s := uncertainty.Sweep{}
	for i := range 11 {
		s.X = append(s.X, float64(i-5)) // symmetric about X0 = 0
		s.Y = append(s.Y, 1+0.5*float64(i-5))
		s.URandom = append(s.URandom, 2e-6)
		s.DOFRandom = append(s.DOFRandom, 4)
	}
	f, err := uncertainty.FitLine(s)
	if err != nil {
		t.Fatal(err)
	}
	// b0 = mean of y: each point weighs 1/11, so ν_eff = (11·(u/11)²)² / (11·(u/11)⁴/4) = 11·4 = 44, the pooled dof.
	checkRel(t, "DOFB0", f.DOFB0, 44, 1e-12) // source: hand arithmetic above (JCGM 100 G.2b)
	// b1 weighs point i by d_i/Σd², d = −5…5: ν_eff = ν·(Σd²)²/Σd⁴ = 4·110²/1958 = 48400/1958 = 24.719…
	checkRel(t, "DOFB1", f.DOFB1, 48400.0/1958, 1e-12) // source: hand arithmetic above (JCGM 100 G.2b)
	// Resolution and systematics have ν = ∞, so they raise ν_eff; an all-∞ budget gives ∞.
	s.MeterResolution = 1e-6
	s.Meter = uncertainty.Spec{OfReading: 10e-6}
	g, err := uncertainty.FitLine(s)
	if err != nil {
		t.Fatal(err)
	}
	if !(g.DOFB0 > 44 && g.DOFB1 > 48400.0/1958) {
		t.Errorf("ν with ∞-dof parts added: %v, %v; want above 44, 24.7", g.DOFB0, g.DOFB1)
	}
	s.URandom, s.DOFRandom = nil, nil
	g, err = uncertainty.FitLine(s)
	if err != nil {
		t.Fatal(err)
	}
	if !math.IsInf(g.DOFB0, 1) || !math.IsInf(g.DOFB1, 1) {
		t.Errorf("Type B only: ν %v, %v; want +Inf", g.DOFB0, g.DOFB1)
	}
}

func TestResidualU(t *testing.T) {
	x := []float64{0, 1, 2, 3, 4, 6, 9}
	u := []float64{1, 2, 1, 0.5, 1, 3, 1}
	y := []float64{0.1, 1.2, 1.9, 3.05, 4.2, 5.8, 9.1}
	ru := uncertainty.ResidualU(x, u)
	if len(ru) != len(x) {
		t.Fatalf("len %d", len(ru))
	}
	// h_ii = ∂ŷ_i/∂y_i of the weighted fit, by refitting (exact: the fit is linear in y).
	base, err := fit.Weighted(x, y, u, 1, 0, true)
	if err != nil {
		t.Fatal(err)
	}
	trace := 0.0
	for i := range x {
		yp := append([]float64(nil), y...)
		yp[i] += 1
		r, err := fit.Weighted(x, yp, u, 1, 0, true)
		if err != nil {
			t.Fatal(err)
		}
		h := r.Predict(x[i]) - base.Predict(x[i])
		trace += h
		checkRel(t, "residual u", ru[i], u[i]*math.Sqrt(1-h), 1e-10) // source: u(e_i) = u_i·sqrt(1 − h_ii)
	}
	checkRel(t, "trace of the hat matrix", trace, 2, 1e-12) // source: trace(H) = number of parameters
	for _, c := range []struct{ x, u []float64 }{
		{[]float64{1, 2}, []float64{1}}, {[]float64{1}, []float64{1}}, {[]float64{2, 2, 2}, []float64{1, 1, 1}},
		{[]float64{1, 2, 3}, []float64{1, 0, 1}}, {[]float64{1, math.NaN(), 3}, []float64{1, 1, 1}},
	} {
		if r := uncertainty.ResidualU(c.x, c.u); r != nil {
			t.Errorf("ResidualU(%v, %v) = %v, want nil", c.x, c.u, r)
		}
	}
}

func TestLinearCombination(t *testing.T) {
	// Hand: g = (1, 2), C = [[4, 1], [1, 9]]: gᵀCg = 4 + 2·2·1 + 4·9 = 44.
	checkRel(t, "sqrt(gᵀCg)", uncertainty.LinearCombination([]float64{1, 2}, [][]float64{{4, 1}, {1, 9}}), math.Sqrt(44), 1e-15)
	if v := uncertainty.LinearCombination([]float64{1, 2}, [][]float64{{1, 0}}); !math.IsNaN(v) {
		t.Errorf("mismatched: %v, want NaN", v)
	}
	if v := uncertainty.LinearCombination([]float64{1, 1}, [][]float64{{1, -1 - 1e-16}, {-1 - 1e-16, 1}}); v != 0 {
		t.Errorf("rounding-negative form: %v, want 0", v)
	}
	var zero uncertainty.LineFit
	if y, u := zero.Predict(3); y != 0 || u != 0 {
		t.Errorf("zero LineFit Predict = %v, %v", y, u)
	}
}

func TestFitLineErrors(t *testing.T) {
	good := realisticSweep()
	mod := func(f func(s *uncertainty.Sweep)) uncertainty.Sweep {
		s := realisticSweep()
		f(&s)
		return s
	}
	if _, err := uncertainty.FitLine(good); err != nil {
		t.Fatal(err)
	}
	for name, c := range map[string]struct {
		s    uncertainty.Sweep
		want error
	}{
		"len Y":          {mod(func(s *uncertainty.Sweep) { s.Y = s.Y[:5] }), uncertainty.ErrInvalidInput},
		"len URandom":    {mod(func(s *uncertainty.Sweep) { s.URandom = s.URandom[:5] }), uncertainty.ErrInvalidInput},
		"no DOF":         {mod(func(s *uncertainty.Sweep) { s.DOFRandom = nil }), uncertainty.ErrInvalidInput},
		"DOF 0":          {mod(func(s *uncertainty.Sweep) { s.DOFRandom[3] = 0 }), uncertainty.ErrInvalidInput},
		"negative u":     {mod(func(s *uncertainty.Sweep) { s.URandom[2] = -1e-6 }), uncertainty.ErrInvalidInput},
		"NaN spec":       {mod(func(s *uncertainty.Sweep) { s.Meter.OfReading = math.NaN() }), uncertainty.ErrInvalidInput},
		"negative range": {mod(func(s *uncertainty.Sweep) { s.Source.Range = -1 }), uncertainty.ErrInvalidInput},
		"mixed zero u": {mod(func(s *uncertainty.Sweep) {
			s.MeterResolution = 0
			s.URandom[4] = 0
		}), uncertainty.ErrInvalidInput},
		"one point": {mod(func(s *uncertainty.Sweep) {
			s.X, s.Y, s.URandom, s.DOFRandom = s.X[:1], s.Y[:1], s.URandom[:1], s.DOFRandom[:1]
		}), fit.ErrTooFewPoints},
		"equal x": {mod(func(s *uncertainty.Sweep) {
			for i := range s.X {
				s.X[i] = 1
			}
		}), fit.ErrSingular},
		"NaN y": {mod(func(s *uncertainty.Sweep) { s.Y[0] = math.NaN() }), fit.ErrInvalidInput},
	} {
		_, err := uncertainty.FitLine(c.s)
		if !errors.Is(err, c.want) {
			t.Errorf("%s: err = %v, want %v", name, err, c.want)
		}
	}
	// DOFRandom may be nil when there is no Type A part; a zero URandom entry needs no dof.
	if _, err := uncertainty.FitLine(mod(func(s *uncertainty.Sweep) { s.URandom[0], s.DOFRandom[0] = 0, 0 })); err != nil {
		t.Errorf("zero URandom with DOF 0 (resolution present): %v", err)
	}
	if _, _, err := uncertainty.FitLineLS([]float64{1, 2}, []float64{1, 2}, 0); !errors.Is(err, fit.ErrTooFewPoints) {
		t.Errorf("FitLineLS 2 points: %v", err)
	}
}
