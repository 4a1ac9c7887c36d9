// Package fit is the least-squares core of the end-of-line gain/offset trim
// station: straight-line and quadratic polynomial fits, ordinary and
// weighted, with coefficient covariances, prediction uncertainties and a
// reader for small x/y[/u] text tables.
//
// The model is y = b0 + b1·(x−x0) [+ b2·(x−x0)²], where x0 is a centring
// point chosen by the caller. Units of every quantity follow the units of x
// and y: b0 is in units of y, b1 in y per x, b2 in y per x². Choosing x0
// near the middle of the data keeps the problem well conditioned and makes
// b0 and b1 nearly uncorrelated; x0 = 0 gives the plain textbook
// coefficients. Origin and WeightedOrigin fit the line through the origin,
// y = b1·x, which has no constant term.
//
// The fits are solved by Householder QR factorisation of the (row-weighted)
// design matrix, never by forming the normal equations, so the condition
// number enters the error once rather than squared. The coefficient
// covariance is computed from the triangular factor as R⁻¹R⁻ᵀ.
//
// All functions in this package are pure: they do not retain or modify their
// arguments and share no state, so they are safe for concurrent use. A
// Result is a plain value; its methods only read it, so one Result may be
// used from several goroutines as long as nobody modifies its slices.
package fit

import (
	"errors"
	"fmt"
	"math"
)

// ErrTooFewPoints is wrapped by the errors of Poly and Weighted when there are
// fewer points than the fit needs (see those functions for the exact counts).
var ErrTooFewPoints = errors.New("too few points")

// ErrSingular is wrapped by the errors of Poly and Weighted when the design
// matrix is rank deficient to working precision, for example when all x are
// equal (order 1) or there are fewer than three distinct x (order 2).
var ErrSingular = errors.New("singular design matrix")

// ErrInvalidInput is wrapped by the errors of Poly and Weighted for invalid
// arguments: mismatched slice lengths, NaN or ±Inf values, an order other
// than 1 or 2, a non-positive uncertainty, or values so large that the
// design matrix overflows.
var ErrInvalidInput = errors.New("invalid input")

// ErrNotFinite is wrapped by the errors of Poly and Weighted when the fit of
// finite data overflows: a coefficient, a covariance, a residual or the
// residual sum of squares comes out NaN or ±Inf (data near the largest
// float64, about 1.8e308, or spread over too many decades). It is wrapped by
// Result.Prediction when the predicted value or its uncertainty is not
// finite. A result that cannot be printed as a number is refused, never
// returned.
var ErrNotFinite = errors.New("result not finite")

// Result is a polynomial least-squares fit y = b0 + b1·(x−x0) [+ b2·(x−x0)²],
// or with ThroughOrigin the line y = b1·x. Units are those of x and y:
// Coef[k] is in units of y per unit of x to the power k (for ThroughOrigin,
// Coef[0] is b1, in y per x), Cov[i][j] in the product of the units of
// Coef[i] and Coef[j].
type Result struct {
	Order int     // 1 = straight line, 2 = quadratic
	X0    float64 // centring point used in the model, units of x; 0 for ThroughOrigin
	// ThroughOrigin marks the model y = b1·x (Origin, WeightedOrigin): no
	// constant term, Coef, StdUnc and Cov hold b1 alone, Order is 1.
	ThroughOrigin bool
	Coef          []float64 // b0, b1[, b2]; b1 alone for ThroughOrigin
	// Cov is the covariance of the coefficients: s²·(XᵀWX)⁻¹ for Poly and
	// for Weighted with absolute=false, where s² = RSS/DOF; (XᵀWX)⁻¹ with
	// W = diag(1/u²) for Weighted with absolute=true.
	Cov       [][]float64
	StdUnc    []float64 // sqrt of the diagonal of Cov, units of Coef
	Residuals []float64 // y_i − ŷ_i (unweighted), same order as the input
	// RSS is the residual sum of squares Σ(y_i − ŷ_i)², or for Weighted the
	// chi-square Σ((y_i − ŷ_i)/u_i)², which is dimensionless.
	RSS float64
	// ResidualSD is sqrt(RSS/DOF): the residual standard deviation in units
	// of y for Poly, the square root of the reduced chi-square for
	// Weighted. It is NaN when DOF is 0 (only possible for Weighted with
	// absolute=true).
	ResidualSD float64
	DOF        int // degrees of freedom, N − len(Coef)
	// RSquared is the coefficient of determination 1 − RSS/TSS, where TSS
	// is the (weighted, for Weighted) total sum of squares of y about its
	// (weighted) mean. It is NaN when all y are equal (TSS = 0).
	//
	// For ThroughOrigin it is the uncentred R² = 1 − RSS/Σy² (weighted:
	// Σw·y²), the one NIST StRD certifies for its no-intercept datasets
	// NoInt1 and NoInt2: a model without a constant term is compared with
	// y = 0, not with y = ȳ. It is NaN when all y are 0, and it is not
	// comparable with the centred R² of a model with an intercept.
	RSquared float64
	N        int // number of points fitted
}

// Poly fits y = b0 + b1·(x−x0) (order 1) or y = b0 + b1·(x−x0) + b2·(x−x0)²
// (order 2) to the points (x[i], y[i]) by ordinary least squares.
//
// x0 is the centring point in units of x; any finite value is allowed, but a
// value near the middle of the data gives the best conditioning. The
// coefficient covariance is s²·(XᵀX)⁻¹ with s² = RSS/DOF.
//
// Errors: ErrInvalidInput (wrapped) if order is not 1 or 2, len(x) ≠ len(y),
// any value or x0 is NaN or ±Inf, or the design matrix overflows;
// ErrNotFinite if the fit overflows (a coefficient, covariance, residual or
// the residual sum of squares would be NaN or ±Inf); ErrTooFewPoints if len(x) < order+2 (at least one degree of freedom is
// needed to estimate s); ErrSingular if the x values do not determine the
// polynomial (e.g. all x equal). The inputs are not modified. Poly is safe
// for concurrent use.
func Poly(x, y []float64, order int, x0 float64) (Result, error) {
	return solve("fit.Poly", x, y, nil, order, x0, false, false)
}

// Origin fits the line through the origin y = b1·x to the points (x[i],
// y[i]) by ordinary least squares: b1 = Σxy/Σx², computed by the same QR
// solver as Poly. The Result has ThroughOrigin set, one coefficient (b1 in
// Coef[0]), DOF = N − 1, covariance s²/Σx² with s² = RSS/DOF, and the
// uncentred R² (see Result.RSquared) that NIST StRD certifies for NoInt1
// and NoInt2.
//
// Errors: ErrInvalidInput (wrapped) if len(x) ≠ len(y) or a value is NaN or
// ±Inf; ErrTooFewPoints if len(x) < 2; ErrSingular if every x is 0;
// ErrNotFinite if the fit overflows. The inputs are not modified. Origin is
// safe for concurrent use.
func Origin(x, y []float64) (Result, error) {
	return solve("fit.Origin", x, y, nil, 1, 0, false, true)
}

// WeightedOrigin is Origin by weighted least squares with the standard
// uncertainties u[i] of y[i], weights 1/u_i², and absolute as for Weighted:
// the covariance is 1/Σ(x²/u²) with absolute=true, scaled by the reduced
// chi-square with absolute=false. RSquared is the uncentred weighted
// 1 − χ²/Σ(y/u)². With absolute=true one point is enough (DOF = 0,
// ResidualSD NaN); otherwise two. Errors: as for Origin and Weighted.
func WeightedOrigin(x, y, u []float64, absolute bool) (Result, error) {
	if u == nil {
		u = []float64{}
	}
	return solve("fit.WeightedOrigin", x, y, u, 1, 0, absolute, true)
}

// Weighted fits the same model as Poly by weighted least squares, with the
// per-point standard uncertainties u[i] of y[i] (units of y) giving weights
// w_i = 1/u_i².
//
// With absolute=true the uncertainties are taken as known and the
// coefficient covariance is (XᵀWX)⁻¹; with absolute=false they are taken as
// relative only and the covariance is scaled by the reduced chi-square,
// s²·(XᵀWX)⁻¹ with s² = RSS/DOF, as in Poly. RSS is the chi-square
// Σ((y_i − ŷ_i)/u_i)²; Residuals are unweighted.
//
// Errors: as for Poly, plus ErrInvalidInput if len(u) ≠ len(x) or any u[i]
// is not a finite positive number. With absolute=true the minimum number of
// points is order+1 (DOF = 0 is allowed; ResidualSD is then NaN); with
// absolute=false it is order+2. The inputs are not modified. Weighted is safe
// for concurrent use.
func Weighted(x, y, u []float64, order int, x0 float64, absolute bool) (Result, error) {
	if u == nil {
		// Distinguish "forgot u" from Poly: a nil u is a length mismatch.
		u = []float64{}
	}
	return solve("fit.Weighted", x, y, u, order, x0, absolute, false)
}

// solve validates the input and runs the QR fit. u == nil means unweighted.
// origin drops the constant term: the one column of the design matrix is
// x − x0 (x0 is 0 then) and y is fitted as it is, not about its mean.
func solve(fn string, x, y, u []float64, order int, x0 float64, absolute, origin bool) (Result, error) {
	if order != 1 && order != 2 {
		return Result{}, fmt.Errorf("%s: %w: order must be 1 or 2, got %d", fn, ErrInvalidInput, order)
	}
	// pow[k] is the power of (x − x0) in column k of the design matrix.
	pow := []int{0, 1, 2}[:order+1]
	if origin {
		pow = []int{1}
	}
	n, p := len(x), len(pow)
	if len(y) != n {
		return Result{}, fmt.Errorf("%s: %w: len(x) = %d but len(y) = %d", fn, ErrInvalidInput, n, len(y))
	}
	if u != nil && len(u) != n {
		return Result{}, fmt.Errorf("%s: %w: len(x) = %d but len(u) = %d", fn, ErrInvalidInput, n, len(u))
	}
	minN := p + 1
	if u != nil && absolute {
		minN = p
	}
	if n < minN {
		model := fmt.Sprintf("order %d", order)
		if origin {
			model = "a line through the origin"
		}
		return Result{}, fmt.Errorf("%s: %w: %s needs at least %d points, got %d", fn, ErrTooFewPoints, model, minN, n)
	}
	if !isFinite(x0) {
		return Result{}, fmt.Errorf("%s: %w: x0 is %v", fn, ErrInvalidInput, x0)
	}
	for i := range n {
		if !isFinite(x[i]) {
			return Result{}, fmt.Errorf("%s: %w: x[%d] is %v", fn, ErrInvalidInput, i, x[i])
		}
		if !isFinite(y[i]) {
			return Result{}, fmt.Errorf("%s: %w: y[%d] is %v", fn, ErrInvalidInput, i, y[i])
		}
		if u != nil && !(u[i] > 0 && isFinite(u[i])) {
			return Result{}, fmt.Errorf("%s: %w: u[%d] is %v; uncertainties must be finite and positive", fn, ErrInvalidInput, i, u[i])
		}
	}

	// Weighted mean of y, with the weights normalised to wn_i = umin/u_i ∈
	// (0, 1] so that nothing overflows; the normalisation cancels in the
	// mean and in R² = 1 − RSS/TSS.
	umin := 1.0
	if u != nil {
		umin = u[0]
		for _, ui := range u {
			umin = math.Min(umin, ui)
		}
	}
	wn := func(i int) float64 {
		if u == nil {
			return 1
		}
		return umin / u[i]
	}
	var sw, swy float64
	for i := range n {
		w2 := wn(i) * wn(i)
		sw += w2
		swy += w2 * y[i]
	}
	ybar := swy / sw
	if origin {
		// No constant term: y is fitted as it is and R² is uncentred.
		ybar = 0
	}

	// Build the row-weighted design matrix, stored by column: a[k*n+i] is
	// w_i·(x_i−x0)^pow[k], and the right-hand side b[i] = w_i·(y_i − ȳ),
	// w_i = 1/u_i. Fitting y − ȳ (and adding ȳ to b0 afterwards, which is
	// exact in the model because it contains a constant term) keeps the
	// rounding in Qᵀb proportional to the spread of y rather than to its
	// offset. Through the origin there is no constant term and ȳ is 0.
	work := make([]float64, (p+1)*n)
	a, b := work[:p*n], work[p*n:]
	for i := range n {
		w := 1.0
		if u != nil {
			w = 1 / u[i]
		}
		t := x[i] - x0
		for k, e := range pow {
			a[k*n+i] = w * [3]float64{1, t, t * t}[e]
		}
		b[i] = w * (y[i] - ybar)
	}
	for i, v := range work {
		if !isFinite(v) {
			col := "y"
			if k := i / n; k < p {
				col = fmt.Sprintf("column %d of the design matrix", k)
			}
			return Result{}, fmt.Errorf("%s: %w: %s overflows at point %d; rescale the data or choose x0 nearer the data", fn, ErrInvalidInput, col, i%n)
		}
	}

	// Householder QR in place (LAPACK dgeqr2/dlarfg style, scale safe).
	// After step k, a[k*n+k] holds R[k][k], a[j*n+k] (j > k) holds R[k][j],
	// and b holds Qᵀb.
	var r [3][3]float64
	for k := range p {
		// Earlier reflections are orthogonal, so this is the norm of the
		// original column k up to rounding.
		colNorm := nrm2(a[k*n : (k+1)*n])
		ck := a[k*n : (k+1)*n]
		alpha := ck[k]
		xnorm := nrm2(ck[k+1:])
		rkk := alpha
		if xnorm != 0 {
			beta := -math.Copysign(math.Hypot(alpha, xnorm), alpha)
			tau := (beta - alpha) / beta
			scal := 1 / (alpha - beta)
			for i := k + 1; i < n; i++ {
				ck[i] *= scal
			}
			// Apply H = I − τ·v·vᵀ, v = (1, ck[k+1:]), to the remaining columns and b.
			for j := k + 1; j <= p; j++ {
				c := work[j*n : (j+1)*n]
				s := c[k]
				for i := k + 1; i < n; i++ {
					s += ck[i] * c[i]
				}
				s *= tau
				c[k] -= s
				for i := k + 1; i < n; i++ {
					c[i] -= s * ck[i]
				}
			}
			rkk = beta
		}
		// A diagonal this small relative to the column norm means column k
		// is a combination of the earlier ones to working precision.
		if !(math.Abs(rkk) > float64(n)*eps*colNorm) {
			if origin {
				return Result{}, fmt.Errorf("%s: %w: every x is 0, so no line through the origin is determined", fn, ErrSingular)
			}
			return Result{}, fmt.Errorf("%s: %w: the x values do not determine an order-%d polynomial (column %d is dependent to working precision; are there at least %d distinct x?)", fn, ErrSingular, order, k, p)
		}
		r[k][k] = rkk
		for j := k + 1; j < p; j++ {
			r[k][j] = a[j*n+k]
		}
	}

	// Coefficients by back substitution: R·c = (Qᵀb)[:p].
	coef := make([]float64, p)
	for k := p - 1; k >= 0; k-- {
		s := b[k]
		for j := k + 1; j < p; j++ {
			s -= r[k][j] * coef[j]
		}
		coef[k] = s / r[k][k]
	}
	if !origin {
		coef[0] += ybar
	}

	// Rinv = R⁻¹ (upper triangular), then (XᵀWX)⁻¹ = R⁻¹R⁻ᵀ.
	var ri [3][3]float64
	for j := range p {
		ri[j][j] = 1 / r[j][j]
		for i := j - 1; i >= 0; i-- {
			s := 0.0
			for k := i + 1; k <= j; k++ {
				s += r[i][k] * ri[k][j]
			}
			ri[i][j] = -s / r[i][i]
		}
	}

	res := Result{Order: order, X0: x0, ThroughOrigin: origin, Coef: coef, N: n, DOF: n - p}
	out := make([]float64, n+p*p+p)
	res.Residuals = out[:n:n]
	covBack := out[n : n+p*p : n+p*p]
	res.StdUnc = out[n+p*p:]

	// Residuals, RSS (chi-square when weighted) and R².
	var rss, rssN, tssN float64
	for i := range n {
		e := y[i] - res.Predict(x[i])
		res.Residuals[i] = e
		if u != nil {
			rss += (e / u[i]) * (e / u[i])
		} else {
			rss += e * e
		}
		en, dn := wn(i)*e, wn(i)*(y[i]-ybar)
		rssN += en * en
		tssN += dn * dn
	}
	res.RSS = rss
	res.ResidualSD = math.Sqrt(rss / float64(res.DOF))
	if res.DOF == 0 {
		res.ResidualSD = math.NaN()
	}
	res.RSquared = math.NaN()
	if tssN > 0 {
		res.RSquared = 1 - rssN/tssN
	}

	scale := 1.0
	if u == nil || !absolute {
		scale = rss / float64(res.DOF)
	}
	res.Cov = make([][]float64, p)
	for i := range p {
		res.Cov[i] = covBack[i*p : (i+1)*p : (i+1)*p]
	}
	for i := range p {
		for j := i; j < p; j++ {
			s := 0.0
			for k := j; k < p; k++ { // ri[i][k] = 0 for k < i, ri[j][k] = 0 for k < j
				s += ri[i][k] * ri[j][k]
			}
			s *= scale
			res.Cov[i][j] = s
			res.Cov[j][i] = s
		}
		res.StdUnc[i] = math.Sqrt(res.Cov[i][i])
	}
	if err := res.checkFinite(); err != nil {
		return Result{}, fmt.Errorf("%s: %w: %v; rescale the data (e.g. to mV or kV) or choose x0 nearer the data", fn, ErrNotFinite, err)
	}
	return res, nil
}

// checkFinite names the first part of r that is NaN or ±Inf. ResidualSD (NaN
// when DOF is 0) and RSquared (NaN when all y are equal) may be NaN by
// definition; they are checked only against overflow to ±Inf.
func (r Result) checkFinite() error {
	for i, v := range r.Coef {
		if !isFinite(v) {
			return fmt.Errorf("coefficient b%d is %v", i, v)
		}
	}
	for i, row := range r.Cov {
		for j, v := range row {
			if !isFinite(v) {
				return fmt.Errorf("covariance of b%d and b%d is %v", i, j, v)
			}
		}
	}
	for i, v := range r.StdUnc {
		if !isFinite(v) {
			return fmt.Errorf("u(b%d) is %v", i, v)
		}
	}
	for i, v := range r.Residuals {
		if !isFinite(v) {
			return fmt.Errorf("residual of point %d is %v", i, v)
		}
	}
	switch {
	case !isFinite(r.RSS):
		return fmt.Errorf("the residual sum of squares is %v", r.RSS)
	case math.IsInf(r.ResidualSD, 0):
		return fmt.Errorf("the residual SD is %v", r.ResidualSD)
	case math.IsInf(r.RSquared, 0):
		return fmt.Errorf("R² is %v", r.RSquared)
	}
	return nil
}

// Predict returns the fitted value ŷ(x) = Σ Coef[k]·(x−X0)^k, or Coef[0]·x
// for ThroughOrigin, in units of y, for x in units of x. Predict on the zero
// Result returns 0.
func (r Result) Predict(x float64) float64 {
	t := x - r.X0
	if r.ThroughOrigin {
		if len(r.Coef) == 0 {
			return 0
		}
		return r.Coef[0] * t
	}
	y := 0.0
	for k := len(r.Coef) - 1; k >= 0; k-- {
		y = y*t + r.Coef[k]
	}
	return y
}

// PredictU returns the fitted value y = ŷ(x) and its standard uncertainty u
// (both in units of y) at x, propagated from the coefficient covariance as
// u² = gᵀ·Cov·g with gradient g = (1, x−X0[, (x−X0)²]), or g = (x) for
// ThroughOrigin. Correlations between the coefficients are included. The
// uncertainty is that of the fitted curve, not of a new single observation.
func (r Result) PredictU(x float64) (y, u float64) {
	t := x - r.X0
	var g [3]float64
	p := min(len(r.Coef), len(r.Cov), len(g))
	gk := 1.0
	if r.ThroughOrigin {
		gk = t
	}
	for k := 0; k < p; k, gk = k+1, gk*t {
		g[k] = gk
	}
	v := 0.0
	for i := range p {
		for j := range p {
			v += g[i] * r.Cov[i][j] * g[j]
		}
	}
	return r.Predict(x), math.Sqrt(math.Max(v, 0))
}

// Prediction is PredictU that refuses what it cannot give as a number: an x that
// is NaN or ±Inf is ErrInvalidInput, a predicted value or uncertainty that
// overflows (x far outside the data, or data near the float64 range) is
// ErrNotFinite, both wrapped.
func (r Result) Prediction(x float64) (y, u float64, err error) {
	if !isFinite(x) {
		return 0, 0, fmt.Errorf("fit: %w: x is %v", ErrInvalidInput, x)
	}
	y, u = r.PredictU(x)
	if !isFinite(y) || !isFinite(u) {
		return 0, 0, fmt.Errorf("fit: %w: at x = %g the prediction is y = %v, u(y) = %v", ErrNotFinite, x, y, u)
	}
	return y, u, nil
}

// Corr returns the correlation coefficient Cov[i][j]/(StdUnc[i]·StdUnc[j])
// of coefficients i and j (dimensionless, in [−1, 1]). It is NaN if either
// variance is zero, as for an exact fit by Poly. Corr panics if i or j is
// out of range, like a slice index.
func (r Result) Corr(i, j int) float64 {
	return r.Cov[i][j] / math.Sqrt(r.Cov[i][i]*r.Cov[j][j])
}

// MaxAbsResidual returns max |Residuals[i]| in units of y (unweighted, also
// for Weighted), or 0 if there are no residuals.
func (r Result) MaxAbsResidual() float64 {
	m := 0.0
	for _, e := range r.Residuals {
		m = math.Max(m, math.Abs(e))
	}
	return m
}

const eps = 0x1p-52 // float64 machine epsilon

func isFinite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// nrm2 returns the Euclidean norm of v without undue overflow or underflow
// (scaled sum of squares, as in reference BLAS dnrm2).
func nrm2(v []float64) float64 {
	scale, ssq := 0.0, 1.0
	for _, e := range v {
		if e == 0 {
			continue
		}
		a := math.Abs(e)
		if scale < a {
			ssq = 1 + ssq*(scale/a)*(scale/a)
			scale = a
		} else {
			ssq += (a / scale) * (a / scale)
		}
	}
	return scale * math.Sqrt(ssq)
}
