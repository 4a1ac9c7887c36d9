package fit_test

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/stat"

	"trimline/sequencer/fit"
)

// certified is one dataset's certified values for the model y = B1·x.
type certified struct {
	b1, sb1, sd, r2 float64
	dof             int
}

// checkCertified fits the line through the origin to a NIST StRD dataset and
// checks every certified value to 1e-10 relative (NIST: a correct
// double-precision solver agrees to at least 10 significant digits). It
// returns the fewest significant digits of agreement.
func checkCertified(t *testing.T, name string, x, y []float64, c certified) float64 {
	t.Helper()
	r, err := fit.Origin(x, y)
	if err != nil {
		t.Fatal(err)
	}
	if !r.ThroughOrigin || r.Order != 1 || r.X0 != 0 || len(r.Coef) != 1 || len(r.StdUnc) != 1 || len(r.Cov) != 1 {
		t.Fatalf("%s: ThroughOrigin %v Order %d X0 %g, %d coefficients, want the one-coefficient model y = b1·x", name, r.ThroughOrigin, r.Order, r.X0, len(r.Coef))
	}
	if r.DOF != c.dof || r.N != len(x) {
		t.Errorf("%s: DOF %d N %d, want %d %d", name, r.DOF, r.N, c.dof, len(x))
	}
	const tol = 1e-10
	worst := 0.0
	for _, v := range []struct {
		what      string
		got, want float64
	}{
		{"B1", r.Coef[0], c.b1},
		{"s(B1)", r.StdUnc[0], c.sb1},
		{"residual SD", r.ResidualSD, c.sd},
		{"R² (uncentred)", r.RSquared, c.r2},
	} {
		checkRel(t, name+" "+v.what, v.got, v.want, tol)
		worst = math.Max(worst, relErr(v.got, v.want))
	}
	digits := -math.Log10(math.Max(worst, 1e-17))
	t.Logf("%s: worst relative error against the certified values %.1e (%.1f significant digits)", name, worst, digits)
	return digits
}

func TestNoInt1(t *testing.T) {
	x, y, u := readTable(t, "nist-strd-noint1.csv")
	if len(x) != 11 || u != nil {
		t.Fatalf("read %d points (u %v), want 11 points and no u", len(x), u)
	}
	checkCertified(t, "NoInt1", x, y, certified{
		b1:  2.07438016528926,      // source: NIST StRD NoInt1, certified B1
		sb1: 0.165289256198347e-01, // source: NIST StRD NoInt1, certified s(B1)
		sd:  3.56753034006338,      // source: NIST StRD NoInt1, certified residual SD
		r2:  0.999365492298663,     // source: NIST StRD NoInt1, certified R-squared (uncentred)
		dof: 10,                    // source: NIST StRD NoInt1, certified residual DOF
	})
	// Hand-worked, exact: y = x + 70 for x = 60 … 70, Σx² = 46585, Σxy = 96635,
	// B1 = Σxy/Σx² = 96635/46585.
	r, _ := fit.Origin(x, y)
	checkRel(t, "B1 = Σxy/Σx²", r.Coef[0], 96635.0/46585, 1e-14)
}

// NoInt2's data and certified values are from memory (NIST StRD, Linear Least
// Squares, NoInt2); the exact hand-worked solution below confirms them.
func TestNoInt2(t *testing.T) {
	x, y, _ := readTable(t, "nist-strd-noint2.csv")
	if len(x) != 3 {
		t.Fatalf("read %d points, want 3", len(x))
	}
	checkCertified(t, "NoInt2", x, y, certified{
		b1:  0.727272727272727,     // source: NIST StRD NoInt2, certified B1 (from memory)
		sb1: 0.420827318078432e-01, // source: NIST StRD NoInt2, certified s(B1) (from memory)
		sd:  0.369274472937998,     // source: NIST StRD NoInt2, certified residual SD (from memory)
		r2:  0.993348115299335,     // source: NIST StRD NoInt2, certified R-squared, uncentred (from memory)
		dof: 2,                     // source: NIST StRD NoInt2, certified residual DOF (from memory)
	})
	// Hand-worked: Σx² = 77, Σxy = 56, Σy² = 41; B1 = 56/77 = 8/11; RSS = Σy² − B1·Σxy
	// = 41 − 448/11 = 3/11; s² = RSS/2 = 3/22; s²(B1) = s²/Σx² = 3/1694;
	// uncentred R² = 1 − RSS/Σy² = 1 − 3/451 = 448/451.
	r, _ := fit.Origin(x, y)
	const tol = 1e-14
	checkRel(t, "B1 = 8/11", r.Coef[0], 8.0/11, tol)                          // source: hand calculation above
	checkRel(t, "RSS = 3/11", r.RSS, 3.0/11, 1e-13)                           // source: hand calculation above
	checkRel(t, "s = √(3/22)", r.ResidualSD, math.Sqrt(3.0/22), 1e-13)        // source: hand calculation above
	checkRel(t, "s(B1) = √(3/1694)", r.StdUnc[0], math.Sqrt(3.0/1694), 1e-13) // source: hand calculation above
	checkRel(t, "R² = 448/451", r.RSquared, 448.0/451, 1e-14)                 // source: hand calculation above
	for i, want := range []float64{3 - 32.0/11, 4 - 40.0/11, 4 - 48.0/11} {
		checkRel(t, fmt.Sprintf("residual %d", i), r.Residuals[i], want, 1e-12) // source: hand calculation above, e = y − (8/11)·x
	}
	// The prediction through the origin: ŷ(10) = 80/11, u = 10·s(B1).
	yp, up := r.PredictU(10)
	checkRel(t, "ŷ(10)", yp, 80.0/11, tol)                     // source: hand calculation above
	checkRel(t, "u(ŷ(10))", up, 10*math.Sqrt(3.0/1694), 1e-13) // source: u² = x²·s²(B1), JCGM 100:2008 eq. (10)
	checkRel(t, "ŷ(0)", r.Predict(0)+1, 1, 0)                  // source: the model passes through the origin
}

// TestOriginGonum cross-checks Origin and WeightedOrigin against gonum's
// stat.LinearRegression with origin=true and its stat.RNoughtSquared (the
// uncentred R² of a line through the origin), on random data.
func TestOriginGonum(t *testing.T) {
	rng := rand.New(rand.NewPCG(20261202, 16))
	for set := range 50 {
		n := 2 + rng.IntN(99)
		b := 4*rng.Float64() - 2
		off, spread := 200*rng.Float64()-100, 1+49*rng.Float64()
		x, y, u, w := make([]float64, n), make([]float64, n), make([]float64, n), make([]float64, n)
		for i := range n {
			x[i] = off + spread*rng.Float64()
			u[i] = 0.01 + rng.Float64()
			w[i] = 1 / (u[i] * u[i])
			y[i] = b*x[i] + u[i]*rng.NormFloat64()
		}
		r, err := fit.Origin(x, y)
		if err != nil {
			t.Fatal(err)
		}
		alpha, beta := stat.LinearRegression(x, y, nil, true)
		if alpha != 0 {
			t.Fatalf("gonum intercept %g with origin=true", alpha)
		}
		checkRel(t, fmt.Sprintf("set %d slope", set), r.Coef[0], beta, 1e-9)                                // source: gonum stat.LinearRegression, origin=true
		checkRel(t, fmt.Sprintf("set %d R₀²", set), r.RSquared, stat.RNoughtSquared(x, y, nil, beta), 1e-9) // source: gonum stat.RNoughtSquared

		rw, err := fit.WeightedOrigin(x, y, u, false)
		if err != nil {
			t.Fatal(err)
		}
		_, beta = stat.LinearRegression(x, y, w, true)
		checkRel(t, fmt.Sprintf("set %d weighted slope", set), rw.Coef[0], beta, 1e-9)                              // source: gonum stat.LinearRegression, origin=true, weights 1/u²
		checkRel(t, fmt.Sprintf("set %d weighted R₀²", set), rw.RSquared, stat.RNoughtSquared(x, y, w, beta), 1e-9) // source: gonum stat.RNoughtSquared, weights 1/u²
	}
}

// TestWeightedOriginHand: x = 1, 2; y = 2, 3; u = 1, 2 → w = 1, 1/4.
//
//	Σwx² = 1 + 1 = 2, Σwxy = 2 + 1.5 = 3.5 → b1 = 7/4, Var(b1) = 1/Σwx² = 1/2 (known u).
//	residuals 2 − 7/4 = 1/4, 3 − 7/2 = −1/2; χ² = 1/16 + (1/4)(1/4) = 1/8, DOF = 1.
//	Relative weights: Var(b1) = (1/2)·χ²/DOF = 1/16. Uncentred R² = 1 − (1/8)/(4 + 9/4) = 49/50.
func TestWeightedOriginHand(t *testing.T) {
	x, y, u := []float64{1, 2}, []float64{2, 3}, []float64{1, 2}
	r, err := fit.WeightedOrigin(x, y, u, true)
	if err != nil {
		t.Fatal(err)
	}
	const tol = 1e-14
	checkRel(t, "b1", r.Coef[0], 7.0/4, tol)      // source: hand calculation above
	checkRel(t, "Var(b1)", r.Cov[0][0], 0.5, tol) // source: hand calculation above
	checkRel(t, "χ²", r.RSS, 1.0/8, tol)          // source: hand calculation above
	checkRel(t, "R²", r.RSquared, 49.0/50, tol)   // source: hand calculation above
	rr, err := fit.WeightedOrigin(x, y, u, false)
	if err != nil {
		t.Fatal(err)
	}
	checkRel(t, "relative Var(b1)", rr.Cov[0][0], 1.0/16, tol) // source: hand calculation above
	one, err := fit.WeightedOrigin([]float64{2}, []float64{5}, []float64{0.5}, true)
	if err != nil || one.DOF != 0 || !math.IsNaN(one.ResidualSD) {
		t.Errorf("one point with known u: %+v, %v; want b1 = 2.5 with DOF 0", one, err)
	}
	checkRel(t, "one-point b1", one.Coef[0], 2.5, tol)        // source: y/x
	checkRel(t, "one-point u(b1)", one.StdUnc[0], 0.5/2, tol) // source: u(y)/x
}

func TestOriginErrors(t *testing.T) {
	for _, tc := range []struct {
		name string
		err  error
		want error
	}{
		// source for every row: the error contracts in the doc comments of fit.Origin and fit.WeightedOrigin.
		{"one point", second(fit.Origin([]float64{1}, []float64{2})), fit.ErrTooFewPoints},
		{"empty", second(fit.Origin(nil, nil)), fit.ErrTooFewPoints},
		{"no point weighted absolute", second(fit.WeightedOrigin(nil, nil, nil, true)), fit.ErrTooFewPoints},
		{"all x zero", second(fit.Origin([]float64{0, 0, 0}, []float64{1, 2, 3})), fit.ErrSingular},
		{"NaN y", second(fit.Origin([]float64{1, 2}, []float64{1, math.NaN()})), fit.ErrInvalidInput},
		{"length mismatch", second(fit.Origin([]float64{1, 2}, []float64{1})), fit.ErrInvalidInput},
		{"nil u", second(fit.WeightedOrigin([]float64{1, 2}, []float64{1, 2}, nil, true)), fit.ErrInvalidInput},
		{"zero u", second(fit.WeightedOrigin([]float64{1, 2}, []float64{1, 2}, []float64{1, 0}, true)), fit.ErrInvalidInput},
	} {
		if !errors.Is(tc.err, tc.want) {
			t.Errorf("%s: error %v, want %v", tc.name, tc.err, tc.want)
		} else {
			t.Logf("%s: %v", tc.name, tc.err)
		}
	}
	// All y zero: b1 = 0 exactly and the uncentred R² has no meaning (Σy² = 0).
	r, err := fit.Origin([]float64{1, 2, 3}, []float64{0, 0, 0})
	if err != nil || r.Coef[0] != 0 || !math.IsNaN(r.RSquared) { // source: fit.Result.RSquared doc, NaN when all y are 0
		t.Errorf("all y zero: %+v, %v", r, err)
	}
}

// Finite data whose fit through the origin overflows is refused, as for Poly
// (source: the ErrNotFinite contract in the doc of fit.Origin).
func TestOriginNotFiniteRefused(t *testing.T) {
	big := 1e308
	r, err := fit.Origin([]float64{1, 2, 3, 4}, []float64{big, -big, big, -big})
	if !errors.Is(err, fit.ErrNotFinite) {
		t.Errorf("alternating 1e308: %+v, %v; want ErrNotFinite", r, err)
	}
}
