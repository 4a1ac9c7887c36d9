package fit_test

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"reflect"
	"testing"

	"gonum.org/v1/gonum/stat"

	"trimline/sequencer/fit"
)

// readTable reads a file from the module's testdata directory.
func readTable(t *testing.T, name string) (x, y, u []float64) {
	t.Helper()
	path := filepath.Join("..", "..", "testdata", name)
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	x, y, u, err = fit.ReadXY(path, f)
	if err != nil {
		t.Fatal(err)
	}
	return x, y, u
}

func relErr(got, want float64) float64 {
	if want == 0 {
		return math.Abs(got)
	}
	return math.Abs(got-want) / math.Abs(want)
}

// checkRel fails unless got agrees with want to relative error tol.
func checkRel(t *testing.T, what string, got, want, tol float64) {
	t.Helper()
	if e := relErr(got, want); !(e <= tol) {
		t.Errorf("%s = %.15g, want %.15g (relative error %.2g > %.2g)", what, got, want, e, tol)
	}
}

// checkPublished fails unless got, rounded to decimals places, equals the
// published value pub (given with exactly that many decimals).
func checkPublished(t *testing.T, what string, got, pub float64, decimals int) {
	t.Helper()
	s := math.Pow(10, float64(decimals))
	if math.Round(got*s) != math.Round(pub*s) {
		t.Errorf("%s = %.*f (from %.9g), published %.*f", what, decimals, got, got, decimals, pub)
	}
}

func TestNorris(t *testing.T) {
	x, y, u := readTable(t, "nist-strd-norris.csv")
	if len(x) != 36 || u != nil {
		t.Fatalf("read %d points (u %v), want 36 points and no u", len(x), u)
	}
	r, err := fit.Poly(x, y, 1, 0)
	if err != nil {
		t.Fatal(err)
	}
	const tol = 1e-10
	checkRel(t, "B0", r.Coef[0], -0.262323073774029, tol)                   // source: NIST StRD Norris, certified B0
	checkRel(t, "s(B0)", r.StdUnc[0], 0.232818234301152, tol)               // source: NIST StRD Norris, certified s(B0)
	checkRel(t, "B1", r.Coef[1], 1.00211681802045, tol)                     // source: NIST StRD Norris, certified B1
	checkRel(t, "s(B1)", r.StdUnc[1], 0.429796848199937e-03, tol)           // source: NIST StRD Norris, certified s(B1)
	checkRel(t, "residual SD", r.ResidualSD, 0.884796396144373, tol)        // source: NIST StRD Norris, certified residual SD
	checkRel(t, "R²", r.RSquared, 0.999993745883712, tol)                   // source: NIST StRD Norris, certified R-squared
	checkRel(t, "RSS", r.RSS, 26.6173985294224, tol)                        // source: NIST StRD Norris, certified residual sum of squares
	if r.DOF != 34 || r.N != 36 || r.Order != 1 || len(r.Residuals) != 36 { // source: NIST StRD Norris, certified residual DOF 34
		t.Errorf("DOF %d N %d Order %d len(Residuals) %d, want 34 36 1 36", r.DOF, r.N, r.Order, len(r.Residuals))
	}
	worst := 0.0
	for _, e := range []float64{relErr(r.Coef[0], -0.262323073774029), relErr(r.StdUnc[0], 0.232818234301152),
		relErr(r.Coef[1], 1.00211681802045), relErr(r.StdUnc[1], 0.429796848199937e-03),
		relErr(r.ResidualSD, 0.884796396144373), relErr(r.RSquared, 0.999993745883712), relErr(r.RSS, 26.6173985294224)} {
		worst = math.Max(worst, e)
	}
	t.Logf("worst relative error against the certified values: %.1e", worst)
	// Self-consistency (source: definitions in fit.Result): StdUnc is sqrt(diag Cov), RSS is Σ residual².
	rss := 0.0
	for _, e := range r.Residuals {
		rss += e * e
	}
	checkRel(t, "Σ residual²", rss, r.RSS, 1e-14)
	checkRel(t, "StdUnc[1]²", r.StdUnc[1]*r.StdUnc[1], r.Cov[1][1], 1e-14)
}

func TestGUMH3(t *testing.T) {
	x, y, _ := readTable(t, "gum-h3-thermometer.csv")
	r, err := fit.Poly(x, y, 1, 20) // model b = y1 + y2·(t − 20 °C), JCGM 100:2008 H.3 eq. (H.12)
	if err != nil {
		t.Fatal(err)
	}
	b30, u30 := r.PredictU(30)

	// Published values, compared at the published digits.
	checkPublished(t, "y1 / °C", r.Coef[0], -0.1712, 4)     // source: JCGM 100:2008 H.3.3, y1 = −0.1712 °C
	checkPublished(t, "s(y1) / °C", r.StdUnc[0], 0.0029, 4) // source: JCGM 100:2008 H.3.3, s(y1) = 0.0029 °C
	checkPublished(t, "y2", r.Coef[1], 0.00218, 5)          // source: JCGM 100:2008 H.3.3, y2 = 0.00218
	checkPublished(t, "s(y2)", r.StdUnc[1], 0.00067, 5)     // source: JCGM 100:2008 H.3.3, s(y2) = 0.00067
	checkPublished(t, "r(y1,y2)", r.Corr(0, 1), -0.930, 3)  // source: JCGM 100:2008 H.3.3, r(y1, y2) = −0.930
	checkPublished(t, "s / °C", r.ResidualSD, 0.0035, 4)    // source: JCGM 100:2008 H.3.3, s = 0.0035 °C
	checkPublished(t, "b(30 °C) / °C", b30, -0.1494, 4)     // source: JCGM 100:2008 H.3.4, b(30 °C) = −0.1494 °C
	checkPublished(t, "u(b(30 °C)) / °C", u30, 0.0041, 4)   // source: JCGM 100:2008 H.3.4, u[b(30 °C)] = 0.0041 °C
	if r.DOF != 9 {                                         // source: JCGM 100:2008 H.3.3, ν = n − 2 = 9
		t.Errorf("DOF = %d, want 9", r.DOF)
	}

	// Recomputed values (full-precision least squares on the H.3 table).
	const tol = 1e-5
	checkRel(t, "y1", r.Coef[0], -0.171203790, tol)         // source: recomputed from JCGM 100:2008 Table H.6 data
	checkRel(t, "s(y1)", r.StdUnc[0], 0.00287760, tol)      // source: recomputed from JCGM 100:2008 Table H.6 data
	checkRel(t, "y2", r.Coef[1], 0.00218270, tol)           // source: recomputed from JCGM 100:2008 Table H.6 data
	checkRel(t, "s(y2)", r.StdUnc[1], 0.000667939, tol)     // source: recomputed from JCGM 100:2008 Table H.6 data
	checkRel(t, "r(y1,y2)", r.Corr(0, 1), -0.930430, tol)   // source: recomputed from JCGM 100:2008 Table H.6 data
	checkRel(t, "s", r.ResidualSD, 0.00349756, tol)         // source: recomputed from JCGM 100:2008 Table H.6 data
	checkRel(t, "b(30)", b30, -0.149377, tol)               // source: recomputed from JCGM 100:2008 Table H.6 data
	checkRel(t, "u(b(30))", u30, 0.0041386, tol)            // source: recomputed from JCGM 100:2008 Table H.6 data
	checkRel(t, "Predict(30)", r.Predict(30), b30, 1e-15)   // source: fit.Result.PredictU contract (y equals Predict)
	checkRel(t, "Corr(1,0)", r.Corr(1, 0), r.Corr(0, 1), 0) // source: covariance matrices are symmetric
	// source: JCGM 100:2008 H.3.4 eq. (H.15), u²(b) = u²(y1) + θ²u²(y2) + 2θ·u(y1)u(y2)r(y1,y2), θ = t − t0.
	th := 30.0 - 20.0
	uH15 := math.Sqrt(r.StdUnc[0]*r.StdUnc[0] + th*th*r.StdUnc[1]*r.StdUnc[1] + 2*th*r.StdUnc[0]*r.StdUnc[1]*r.Corr(0, 1))
	checkRel(t, "u(b(30)) by eq. (H.15)", u30, uH15, 1e-12)
}

func TestExactQuadratic(t *testing.T) {
	var x, y []float64
	for i := range 21 {
		v := float64(i)
		x = append(x, v)
		y = append(y, 1+v+v*v) // exact in float64
	}
	for _, tc := range []struct {
		x0   float64
		want []float64
	}{
		{0, []float64{1, 1, 1}},          // source: constructed, y = 1 + x + x²
		{10, []float64{111, 21, 1}},      // source: algebra, 1 + (t+10) + (t+10)² = 111 + 21t + t²
		{-3, []float64{7, -5, 1}},        // source: algebra, 1 + (t−3) + (t−3)² = 7 − 5t + t²
		{25.5, []float64{676.75, 52, 1}}, // source: algebra, 1 + (t+25.5) + (t+25.5)² = 676.75 + 52t + t²
	} {
		r, err := fit.Poly(x, y, 2, tc.x0)
		if err != nil {
			t.Fatal(err)
		}
		for k, w := range tc.want {
			checkRel(t, fmt.Sprintf("x0=%g b%d", tc.x0, k), r.Coef[k], w, 1e-12) // source: constructed exact quadratic
		}
		if r.ResidualSD > 1e-12 || r.MaxAbsResidual() > 1e-12 { // source: exact data, residuals are rounding only
			t.Errorf("x0=%g: residual SD %g, max |residual| %g, want ~0", tc.x0, r.ResidualSD, r.MaxAbsResidual())
		}
		checkRel(t, fmt.Sprintf("x0=%g R²", tc.x0), r.RSquared, 1, 1e-15) // source: exact fit, R² = 1
	}
}

// TestFarFromOrigin fits a line to x = 1e6 … 1e6+100 without centring
// (x0 = 0). The design matrix [1 x] has condition number ≈ 6e4 and the
// normal equations square it (ΣX² ≈ 1e14 per point cancels against (ΣX)²):
// measured, they keep only about 6–7 digits here, while QR keeps about 11.
//
// The intercept is chosen comparable to b1·x. If |b0| ≪ |b1·x| (say b0 = 0.5
// with y ≈ 1e6), b0 is ill-determined by the data themselves: changing the y
// values by one part in 1e16 moves it by ~1e-4 relative, so 8 digits cannot
// be expected from any method.
func TestFarFromOrigin(t *testing.T) {
	const b0, b1 = 1234567.5, 0.75 // source: constructed line y = 1234567.5 + 0.75·x
	var x, y []float64
	for i := range 101 {
		xi := 1e6 + float64(i)
		x = append(x, xi)
		y = append(y, b0+b1*xi) // exact: 0.75·xi and the sum are representable
	}
	r, err := fit.Poly(x, y, 1, 0)
	if err != nil {
		t.Fatal(err)
	}
	checkRel(t, "b0", r.Coef[0], b0, 1e-8) // source: constructed line, ≥ 8 digits required
	checkRel(t, "b1", r.Coef[1], b1, 1e-8) // source: constructed line, ≥ 8 digits required
	t.Logf("QR:               b0 rel err %.1e, b1 rel err %.1e", relErr(r.Coef[0], b0), relErr(r.Coef[1], b1))

	// For contrast only (not checked): the textbook normal equations.
	var n, sx, sy, sxx, sxy float64
	for i := range x {
		n, sx, sy, sxx, sxy = n+1, sx+x[i], sy+y[i], sxx+x[i]*x[i], sxy+x[i]*y[i]
	}
	d := n*sxx - sx*sx
	nb1 := (n*sxy - sx*sy) / d
	nb0 := (sy*sxx - sx*sxy) / d
	t.Logf("normal equations: b0 rel err %.1e, b1 rel err %.1e", relErr(nb0, b0), relErr(nb1, b1))

	// Centring at the data removes the ill-conditioning.
	rc, err := fit.Poly(x, y, 1, 1e6+50)
	if err != nil {
		t.Fatal(err)
	}
	checkRel(t, "centred b0", rc.Coef[0], b0+b1*(1e6+50), 1e-14) // source: constructed line evaluated at x0
	checkRel(t, "centred b1", rc.Coef[1], b1, 1e-12)             // source: constructed line
	t.Logf("centred QR:       b0 rel err %.1e, b1 rel err %.1e", relErr(rc.Coef[0], b0+b1*(1e6+50)), relErr(rc.Coef[1], b1))
}

func TestGonumLinearRegression(t *testing.T) {
	rng := rand.New(rand.NewPCG(20240601, 7))
	for set := range 50 {
		n := 3 + rng.IntN(98)
		a := (1 + 9*rng.Float64()) * float64(1-2*rng.IntN(2)) // |intercept| in [1, 10)
		b := 4*rng.Float64() - 2
		off, spread := 200*rng.Float64()-100, 1+49*rng.Float64()
		x, y, u, w := make([]float64, n), make([]float64, n), make([]float64, n), make([]float64, n)
		for i := range n {
			x[i] = off + spread*rng.Float64()
			u[i] = 0.01 + rng.Float64()
			w[i] = 1 / (u[i] * u[i])
			y[i] = a + b*x[i] + u[i]*rng.NormFloat64()
		}

		r, err := fit.Poly(x, y, 1, 0)
		if err != nil {
			t.Fatal(err)
		}
		alpha, beta := stat.LinearRegression(x, y, nil, false)
		checkRel(t, fmt.Sprintf("set %d intercept", set), r.Coef[0], alpha, 1e-9)                           // source: gonum stat.LinearRegression
		checkRel(t, fmt.Sprintf("set %d slope", set), r.Coef[1], beta, 1e-9)                                // source: gonum stat.LinearRegression
		checkRel(t, fmt.Sprintf("set %d R²", set), r.RSquared, stat.RSquared(x, y, nil, alpha, beta), 1e-9) // source: gonum stat.RSquared

		rw, err := fit.Weighted(x, y, u, 1, 0, false)
		if err != nil {
			t.Fatal(err)
		}
		alpha, beta = stat.LinearRegression(x, y, w, false)
		checkRel(t, fmt.Sprintf("set %d weighted intercept", set), rw.Coef[0], alpha, 1e-9)                         // source: gonum stat.LinearRegression with weights 1/u²
		checkRel(t, fmt.Sprintf("set %d weighted slope", set), rw.Coef[1], beta, 1e-9)                              // source: gonum stat.LinearRegression with weights 1/u²
		checkRel(t, fmt.Sprintf("set %d weighted R²", set), rw.RSquared, stat.RSquared(x, y, w, alpha, beta), 1e-9) // source: gonum stat.RSquared with weights 1/u²
	}
}

func TestWeightedEqualUEqualsPoly(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for _, order := range []int{1, 2} {
		n := 17
		x, y, u := make([]float64, n), make([]float64, n), make([]float64, n)
		for i := range n {
			x[i] = float64(i) + 0.3*rng.Float64()
			y[i] = 2 - 0.5*x[i] + 0.01*x[i]*x[i] + 0.1*rng.NormFloat64()
			u[i] = 0.37
		}
		p, err := fit.Poly(x, y, order, 8)
		if err != nil {
			t.Fatal(err)
		}
		wr, err := fit.Weighted(x, y, u, order, 8, false)
		if err != nil {
			t.Fatal(err)
		}
		// With absolute uncertainties equal to Poly's residual SD, the known-σ
		// covariance equals Poly's s²-scaled covariance.
		s := make([]float64, n)
		for i := range s {
			s[i] = p.ResidualSD
		}
		wa, err := fit.Weighted(x, y, s, order, 8, true)
		if err != nil {
			t.Fatal(err)
		}
		const tol = 1e-12
		for i := range order + 1 {
			checkRel(t, fmt.Sprintf("order %d coef %d", order, i), wr.Coef[i], p.Coef[i], tol) // source: WLS with equal weights is OLS
			for j := range order + 1 {
				checkRel(t, fmt.Sprintf("order %d relative Cov[%d][%d]", order, i, j), wr.Cov[i][j], p.Cov[i][j], tol) // source: WLS with equal weights is OLS
				checkRel(t, fmt.Sprintf("order %d absolute Cov[%d][%d]", order, i, j), wa.Cov[i][j], p.Cov[i][j], tol) // source: (XᵀX)⁻¹/s² · s² = s²(XᵀX)⁻¹
			}
		}
		for i := range n {
			checkRel(t, fmt.Sprintf("order %d residual %d", order, i), wr.Residuals[i], p.Residuals[i], 1e-9) // source: WLS with equal weights is OLS
		}
		checkRel(t, "RSS", wr.RSS, p.RSS/(0.37*0.37), tol)               // source: chi-square = RSS/u²
		checkRel(t, "ResidualSD", wr.ResidualSD, p.ResidualSD/0.37, tol) // source: sqrt(chi-square/DOF) = s/u
		checkRel(t, "reduced chi-square", wa.ResidualSD, 1, tol)         // source: u = s makes chi-square/DOF = 1
		checkRel(t, "R²", wr.RSquared, p.RSquared, tol)                  // source: R² is invariant under a common weight
	}
}

// TestWeightedAbsoluteHand checks a case small enough to do by hand.
//
//	x = 0, 1, 2;  y = 1, 3, 4;  u = 1, 1, 2  →  w = 1/u² = 1, 1, 1/4;  x0 = 0.
//	XᵀWX = [Σw  Σwx; Σwx  Σwx²] = [9/4  3/2; 3/2  2],  det = 9/2 − 9/4 = 9/4,
//	(XᵀWX)⁻¹ = (4/9)·[2  −3/2; −3/2  9/4] = [8/9  −2/3; −2/3  1].
//	XᵀWy = [Σwy; Σwxy] = [5; 5]  →  b = (XᵀWX)⁻¹XᵀWy = [40/9 − 10/3; −10/3 + 5] = [10/9; 5/3].
//	ŷ = 10/9, 25/9, 40/9;  residuals = −1/9, 2/9, −4/9.
//	χ² = Σw·e² = 1/81 + 4/81 + (1/4)(16/81) = 1/9,  DOF = 1.
//	r(b0,b1) = (−2/3)/sqrt(8/9 · 1) = −1/√2.
//	At x = 1: g = (1, 1), u² = 8/9 − 2·2/3 + 1 = 5/9.
//	Weighted mean ȳ = 5/(9/4) = 20/9; TSS = 121/81 + 49/81 + (1/4)(256/81) = 234/81; R² = 1 − 9/234 = 25/26.
func TestWeightedAbsoluteHand(t *testing.T) {
	x := []float64{0, 1, 2}
	y := []float64{1, 3, 4}
	u := []float64{1, 1, 2}
	r, err := fit.Weighted(x, y, u, 1, 0, true)
	if err != nil {
		t.Fatal(err)
	}
	const tol = 1e-14
	checkRel(t, "b0", r.Coef[0], 10.0/9, tol)                  // source: hand calculation above
	checkRel(t, "b1", r.Coef[1], 5.0/3, tol)                   // source: hand calculation above
	checkRel(t, "Cov[0][0]", r.Cov[0][0], 8.0/9, tol)          // source: hand calculation above
	checkRel(t, "Cov[0][1]", r.Cov[0][1], -2.0/3, tol)         // source: hand calculation above
	checkRel(t, "Cov[1][0]", r.Cov[1][0], -2.0/3, tol)         // source: hand calculation above
	checkRel(t, "Cov[1][1]", r.Cov[1][1], 1, tol)              // source: hand calculation above
	checkRel(t, "StdUnc[0]", r.StdUnc[0], math.Sqrt(8)/3, tol) // source: hand calculation above
	checkRel(t, "StdUnc[1]", r.StdUnc[1], 1, tol)              // source: hand calculation above
	checkRel(t, "Corr", r.Corr(0, 1), -1/math.Sqrt2, tol)      // source: hand calculation above
	checkRel(t, "χ²", r.RSS, 1.0/9, tol)                       // source: hand calculation above
	checkRel(t, "sqrt(χ²/DOF)", r.ResidualSD, 1.0/3, tol)      // source: hand calculation above
	checkRel(t, "R²", r.RSquared, 25.0/26, tol)                // source: hand calculation above
	for i, want := range []float64{-1.0 / 9, 2.0 / 9, -4.0 / 9} {
		checkRel(t, fmt.Sprintf("residual %d", i), r.Residuals[i], want, 1e-13) // source: hand calculation above
	}
	checkRel(t, "MaxAbsResidual", r.MaxAbsResidual(), 4.0/9, 1e-13) // source: hand calculation above
	yp, up := r.PredictU(1)
	checkRel(t, "ŷ(1)", yp, 25.0/9, tol)            // source: hand calculation above
	checkRel(t, "u(ŷ(1))", up, math.Sqrt(5)/3, tol) // source: hand calculation above

	// Relative weights: the same fit, covariance scaled by χ²/DOF = 1/9.
	rr, err := fit.Weighted(x, y, u, 1, 0, false)
	if err != nil {
		t.Fatal(err)
	}
	checkRel(t, "relative Cov[0][0]", rr.Cov[0][0], 8.0/81, tol)  // source: hand calculation above × 1/9
	checkRel(t, "relative Cov[0][1]", rr.Cov[0][1], -2.0/27, tol) // source: hand calculation above × 1/9
	checkRel(t, "relative Cov[1][1]", rr.Cov[1][1], 1.0/9, tol)   // source: hand calculation above × 1/9

	// Two points with known uncertainties: a two-point trim, DOF = 0.
	r2, err := fit.Weighted([]float64{0, 2}, []float64{1, 5}, []float64{1, 1}, 1, 0, true)
	if err != nil {
		t.Fatal(err)
	}
	checkRel(t, "2-point b1", r2.Coef[1], 2, tol) // source: slope (5−1)/(2−0)
	// source: hand, XᵀX = [2 2; 2 4], inverse [1 −1/2; −1/2 1/2].
	checkRel(t, "2-point Cov[0][0]", r2.Cov[0][0], 1, tol)
	checkRel(t, "2-point Cov[1][1]", r2.Cov[1][1], 0.5, tol)
	if r2.DOF != 0 || !math.IsNaN(r2.ResidualSD) { // source: fit.Result doc, ResidualSD NaN when DOF = 0
		t.Errorf("2-point DOF %d ResidualSD %g, want 0 NaN", r2.DOF, r2.ResidualSD)
	}
}

func TestErrors(t *testing.T) {
	nan, inf := math.NaN(), math.Inf(1)
	x3, y3 := []float64{1, 2, 3}, []float64{1, 2, 4}
	for _, tc := range []struct {
		name string
		err  error
		want error
	}{
		// source for every row: the error contracts in the doc comments of fit.Poly and fit.Weighted.
		{"too few line", second(fit.Poly([]float64{1, 2}, []float64{1, 2}, 1, 0)), fit.ErrTooFewPoints},
		{"too few quadratic", second(fit.Poly(x3, y3, 2, 0)), fit.ErrTooFewPoints},
		{"empty", second(fit.Poly(nil, nil, 1, 0)), fit.ErrTooFewPoints},
		{"too few weighted relative", second(fit.Weighted([]float64{1, 2}, []float64{1, 2}, []float64{1, 1}, 1, 0, false)), fit.ErrTooFewPoints},
		{"too few weighted absolute", second(fit.Weighted([]float64{1}, []float64{1}, []float64{1}, 1, 0, true)), fit.ErrTooFewPoints},
		{"NaN x", second(fit.Poly([]float64{1, nan, 3}, y3, 1, 0)), fit.ErrInvalidInput},
		{"NaN y", second(fit.Poly(x3, []float64{1, 2, nan}, 1, 0)), fit.ErrInvalidInput},
		{"Inf y", second(fit.Poly(x3, []float64{1, inf, 2}, 1, 0)), fit.ErrInvalidInput},
		{"NaN x0", second(fit.Poly(x3, y3, 1, nan)), fit.ErrInvalidInput},
		{"overflow", second(fit.Poly([]float64{-1e200, 0, 1, 1e200}, []float64{1, 2, 3, 4}, 2, 0)), fit.ErrInvalidInput},
		{"length mismatch", second(fit.Poly(x3, y3[:2], 1, 0)), fit.ErrInvalidInput},
		{"u length mismatch", second(fit.Weighted(x3, y3, []float64{1, 1}, 1, 0, true)), fit.ErrInvalidInput},
		{"nil u", second(fit.Weighted(x3, y3, nil, 1, 0, true)), fit.ErrInvalidInput},
		{"order 3", second(fit.Poly(x3, y3, 3, 0)), fit.ErrInvalidInput},
		{"order 0", second(fit.Weighted(x3, y3, []float64{1, 1, 1}, 0, 0, true)), fit.ErrInvalidInput},
		{"zero u", second(fit.Weighted(x3, y3, []float64{1, 0, 1}, 1, 0, true)), fit.ErrInvalidInput},
		{"negative u", second(fit.Weighted(x3, y3, []float64{1, -1, 1}, 1, 0, true)), fit.ErrInvalidInput},
		{"NaN u", second(fit.Weighted(x3, y3, []float64{1, nan, 1}, 1, 0, true)), fit.ErrInvalidInput},
		{"all x equal", second(fit.Poly([]float64{2, 2, 2}, y3, 1, 0)), fit.ErrSingular},
		{"all x equal centred", second(fit.Poly([]float64{2, 2, 2}, y3, 1, 2)), fit.ErrSingular},
		{"two distinct x for quadratic", second(fit.Poly([]float64{1, 1, 2, 2}, []float64{1, 2, 3, 4}, 2, 0)), fit.ErrSingular},
	} {
		if !errors.Is(tc.err, tc.want) {
			t.Errorf("%s: error %v, want %v", tc.name, tc.err, tc.want)
		} else {
			t.Logf("%s: %v", tc.name, tc.err)
		}
	}
}

func second(_ fit.Result, err error) error { return err }

func TestResultDoesNotAliasInput(t *testing.T) {
	x := []float64{1, 2, 3, 4}
	y := []float64{2, 4, 7, 8}
	xc, yc := append([]float64(nil), x...), append([]float64(nil), y...)
	r, err := fit.Poly(x, y, 1, 0)
	if err != nil {
		t.Fatal(err)
	}
	for i := range x {
		if x[i] != xc[i] || y[i] != yc[i] { // source: fit.Poly doc, inputs are not modified
			t.Fatalf("input modified")
		}
	}
	r.Residuals[0] = 99 // must not touch anything else
	if r.Cov[0][0] == 99 || r.StdUnc[0] == 99 {
		t.Fatal("Residuals aliases Cov or StdUnc")
	}
}

// FuzzPoly checks that Poly and Weighted never panic and that a successful
// fit has consistent shapes.
func FuzzPoly(f *testing.F) {
	f.Add(1.0, 2.0, 3.0, 4.0, 0.5, 2.0, 1.0, 0.0, uint8(1))
	f.Add(1e6, 1e6, 1e6+1, 0.0, 1e-300, 1e300, 5e-324, 1e308, uint8(2))
	f.Fuzz(func(t *testing.T, a, b, c, d, e, g, h, x0 float64, order uint8) {
		x := []float64{a, b, c, d}
		y := []float64{e, g, h, a}
		u := []float64{math.Abs(e), math.Abs(b), 1, math.Abs(h)}
		for _, abs := range []bool{false, true} {
			for _, run := range []func() (fit.Result, error){
				func() (fit.Result, error) { return fit.Poly(x, y, int(order%4), x0) },
				func() (fit.Result, error) { return fit.Weighted(x, y, u, int(order%4), x0, abs) },
			} {
				r, err := run()
				if err != nil {
					continue
				}
				p := r.Order + 1
				if len(r.Coef) != p || len(r.Cov) != p || len(r.StdUnc) != p || len(r.Residuals) != 4 || r.DOF != 4-p {
					t.Fatalf("inconsistent result %+v", r)
				}
				r.PredictU(x0)
				r.Corr(0, p-1)
				r.MaxAbsResidual()
			}
		}
	})
}

// ExamplePoly fits the GUM H.3 thermometer calibration and predicts the
// correction at 30 °C with its standard uncertainty.
func ExamplePoly() {
	t := []float64{21.521, 22.012, 22.512, 23.003, 23.507, 23.999, 24.513, 25.002, 25.503, 26.010, 26.511}
	b := []float64{-0.171, -0.169, -0.166, -0.159, -0.164, -0.165, -0.156, -0.157, -0.159, -0.161, -0.160}
	r, err := fit.Poly(t, b, 1, 20)
	if err != nil {
		fmt.Println(err)
		return
	}
	c, u := r.PredictU(30)
	fmt.Printf("y1 = %.4f °C, y2 = %.5f, r = %.3f\n", r.Coef[0], r.Coef[1], r.Corr(0, 1))
	fmt.Printf("b(30 °C) = %.4f °C, u = %.4f °C\n", c, u)
	// Output:
	// y1 = -0.1712 °C, y2 = 0.00218, r = -0.930
	// b(30 °C) = -0.1494 °C, u = 0.0041 °C
}

// TestConcurrent backs the concurrency contract (run with -race): fits on
// shared, read-only inputs from many goroutines give identical results.
func TestConcurrent(t *testing.T) {
	x, y, _ := readTable(t, "nist-strd-norris.csv")
	want, err := fit.Poly(x, y, 2, 500)
	if err != nil {
		t.Fatal(err)
	}
	errs := make(chan error, 8)
	for range 8 {
		go func() {
			for range 50 {
				got, err := fit.Poly(x, y, 2, 500)
				if err == nil && !reflect.DeepEqual(got, want) { // source: fit package doc, pure functions
					err = fmt.Errorf("result differs: %v vs %v", got.Coef, want.Coef)
				}
				if err != nil {
					errs <- err
					return
				}
				got.PredictU(100)
			}
			errs <- nil
		}()
	}
	for range 8 {
		if err := <-errs; err != nil {
			t.Error(err)
		}
	}
}
