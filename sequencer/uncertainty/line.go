package uncertainty

import (
	"errors"
	"fmt"
	"math"
	"slices"

	"trimline/sequencer/fit"
)

// ErrInvalidInput is wrapped by the errors of FitLine, FitLineLS,
// FitQuadratic, LackOfFit and MonteCarlo for arguments outside their
// contracts (mismatched lengths, negative or non-finite uncertainties or
// specs, missing degrees of freedom).
// Errors from the underlying fit (fit.ErrTooFewPoints, fit.ErrSingular,
// fit.ErrInvalidInput) are wrapped too and can be tested with errors.Is.
var ErrInvalidInput = errors.New("invalid input")

// Names of the budget rows of FitLine and FitLineLS, in the order FitLine
// lists them (Input.Name and Component.Name).
const (
	NameRepeatability   = "repeatability"    // Type A scatter of the point means (URandom), per point
	NameResolution      = "meter resolution" // rounding to MeterResolution, per point
	NameMeterGain       = "meter gain"       // g_m, rectangular ±Meter.OfReading
	NameMeterOffset     = "meter offset"     // o_m, rectangular ±Meter.OfRange·Meter.Range
	NameSourceGain      = "source gain"      // g_s, rectangular ±Source.OfReading
	NameSourceOffset    = "source offset"    // o_s, rectangular ±Source.OfRange·Source.Range
	NameResidualScatter = "residual scatter" // FitLineLS only: s from the residuals, per point
)

// Sweep describes one sweep for the uncertainty analysis: stimulus x_i (V,
// programmed), mean output y_i (V), the Type A standard uncertainty of each
// mean (V) with its dof, the meter spec/resolution and the source spec.
type Sweep struct {
	X, Y []float64
	// X0 is the centring point of the model y = b0 + b1·(x − X0), volts of
	// stimulus; 0 gives the intercept at zero stimulus.
	X0 float64
	// URandom is s/√n of the readings at each point, V. nil means all 0.
	URandom []float64
	// DOFRandom is n − 1 of each point (any value > 0, +Inf allowed). It
	// must have the length of X when any URandom is positive; it may be nil
	// otherwise.
	DOFRandom []float64
	// PooledRandom says the URandom_i come from one pooled standard deviation
	// s_p (URandom_i = s_p/√n_i) whose degrees of freedom Σ(n_i − 1) every
	// DOFRandom_i gives: the per-point Type A inputs are then one input with
	// those degrees of freedom (they are not independent estimates of
	// variance), and Welch–Satterthwaite counts them once (JCGM 100 G.4.1).
	// The errors of the means stay independent from point to point.
	PooledRandom    bool
	Meter           Spec    // on the output readings
	MeterResolution float64 // V per count on the range in use; 0 = none
	Source          Spec    // on the programmed stimulus
	// SourceZero, when not nil, replaces the source's offset spec
	// (Source.OfRange·Source.Range, rectangular) by a measured offset: a zero
	// check found the stimulus the station delivers at a programmed 0 (the
	// source's offset and the thermal EMFs of the wiring), the caller has
	// already applied that estimate to X, and what remains is the estimate's
	// own uncertainty. The input keeps the name NameSourceOffset.
	SourceZero *Measured
}

// Measured is an input known from a measurement rather than a specification:
// standard uncertainty U (in the input's unit) with DOF degrees of freedom
// (math.Inf(1) = infinite), Type A, normally distributed (a scaled and shifted
// t for finite DOF in a Monte Carlo draw, JCGM 101 §6.4.9).
type Measured struct {
	U, DOF float64
	// Kind is the evaluation the budget names it by: "" is KindA; a measured
	// quantity budgeted together with a specification it could not beat (a
	// noisy zero check beside the spec it would have replaced) is KindAB.
	Kind string
}

// KindAB names a budget row that combines a Type A evaluation with Type B
// ones (JCGM 100 §4.2, §4.3) in one input.
const KindAB = "A+B"

// Evaluation is m's Kind, KindA when not set.
func (m Measured) Evaluation() string {
	if m.Kind == "" {
		return KindA
	}
	return m.Kind
}

// Input is one input quantity of a fit's uncertainty model with its
// sensitivity coefficients: an error whose best estimate is 0, with standard
// uncertainty U in its own unit (V for offsets and per-point errors, 1 for
// gains) and C = (∂β0/∂input, ∂β1/∂input), so that it contributes
// C·Cᵀ·U² to the covariance of (b0, b1). Inputs are independent of each
// other.
type Input struct {
	Name  string // budget row it belongs to (one of the Name… constants)
	Point int    // index of the sweep point for per-point inputs, −1 for shared ones
	Kind  string // KindA or KindB
	U     float64
	DOF   float64 // math.Inf(1) = infinite
	// Pooled marks inputs whose U is one common estimate (FitLineLS's
	// residual s): together they carry DOF once; Welch–Satterthwaite is not
	// applied among them.
	Pooled bool
	C      [2]float64
}

// LineFit is the straight line y = b0 + b1·(x − X0) fitted to a Sweep with
// uncertainty. B0 and residuals are in volts, B1 in V/V; covariances in the
// products of those units.
type LineFit struct {
	X0     float64 // centring point, V of stimulus
	B0, B1 float64
	// CovRandom is the covariance from the random (Type A + resolution)
	// parts, point-to-point independent: weighted LS (weights 1/u_i²),
	// (XᵀWX)⁻¹. For FitLineLS it is s²·(XᵀX)⁻¹.
	CovRandom [2][2]float64
	// CovSys is the covariance from the correlated systematic parts (meter
	// gain and offset, source gain and offset), shared by every point.
	CovSys [2][2]float64
	// Cov is CovRandom + CovSys.
	Cov [2][2]float64
	// DOFB0 and DOFB1 are the effective dof of u(b0) and u(b1), by
	// Welch–Satterthwaite over the inputs (see the package doc).
	DOFB0, DOFB1 float64
	Residuals    []float64 // y_i − ŷ_i, V, in input order
	ResidualDOF  int       // n − 2
	// Chi2 is Σ(residual_i/u_i)² of FitLine (dimensionless, expected ≈
	// ResidualDOF when the u_i explain the scatter); NaN when there is no
	// random uncertainty to weight with and for FitLineLS.
	Chi2 float64
	// Budget lists the components of u(b0), one per row name, for a
	// certificate's budget table; BudgetB1 the same for b1. For FitLine
	// there are always six rows in the order of the Name… constants
	// (NameRepeatability … NameSourceOffset), zero rows included; for
	// FitLineLS one row, NameResidualScatter. Combine(Budget) gives
	// sqrt(Cov[0][0]) (to rounding) and DOFB0.
	Budget   []Component
	BudgetB1 []Component
	// Inputs are the individual input quantities behind the budget, per
	// point where they are per point.
	Inputs []Input
}

// FitLine fits y = b0 + b1·(x − X0) to a Sweep by weighted least squares
// (fit.Weighted with absolute=true, weights 1/u_i², u_i² = URandom_i² +
// (MeterResolution/(2√3))²) and evaluates the covariance of (b0, b1) from the
// random parts and from the four systematic errors of the package doc's
// model, with Welch–Satterthwaite dof. Equal u_i give the ordinary
// least-squares line. When every u_i is 0 (no URandom, no resolution) the
// line is the ordinary least-squares one and CovRandom is zero.
//
// Errors (wrapping ErrInvalidInput): len(Y) ≠ len(X); URandom or DOFRandom
// non-nil with another length; a URandom_i negative or not finite; a positive
// URandom_i without a DOFRandom_i > 0; a negative or non-finite
// MeterResolution, X0 or spec field; some but not all u_i zero (a point
// without uncertainty would get infinite weight). Errors of fit.Weighted are
// wrapped (fewer than 2 points: fit.ErrTooFewPoints; all x equal:
// fit.ErrSingular; NaN data: fit.ErrInvalidInput). The Sweep is not
// modified. FitLine is safe for concurrent use.
func FitLine(s Sweep) (LineFit, error) {
	const fn = "uncertainty.FitLine"
	u, uRes, noRandom, err := s.pointU(fn)
	if err != nil {
		return LineFit{}, err
	}
	r, err := fit.Weighted(s.X, s.Y, u, 1, s.X0, true)
	if err != nil {
		return LineFit{}, fmt.Errorf("%s: %w", fn, err)
	}
	f := LineFit{
		X0: s.X0, B0: r.Coef[0], B1: r.Coef[1],
		Residuals: r.Residuals, ResidualDOF: r.DOF, Chi2: r.RSS,
	}
	if noRandom {
		f.Chi2 = math.NaN()
	} else {
		f.CovRandom = [2][2]float64{{r.Cov[0][0], r.Cov[0][1]}, {r.Cov[1][0], r.Cov[1][1]}}
	}

	a0, a1 := lsWeights(s.X, u, s.X0)
	f.Inputs = make([]Input, 0, 2*len(s.X)+4)
	for _, in := range s.pointInputs(uRes) {
		i := in.point
		f.Inputs = append(f.Inputs, Input{Name: in.name, Point: i, Kind: in.kind,
			U: in.u, DOF: in.dof, Pooled: in.pooled, C: [2]float64{-a0[i], -a1[i]}})
	}
	f.addShared(s)
	rows := []string{NameRepeatability, NameResolution, NameMeterGain, NameMeterOffset, NameSourceGain, NameSourceOffset}
	f.finish(rows)
	return f, nil
}

// FitLineLS fits y = b0 + b1·(x − x0) by ordinary least squares (fit.Poly)
// and takes the uncertainty from the residual scatter alone, as JCGM 100 H.3
// does: s = sqrt(RSS/(n − 2)) is the common standard uncertainty of every y
// (units of y), Cov = CovRandom = s²·(XᵀX)⁻¹, CovSys = 0, and DOFB0 = DOFB1
// = n − 2 (the inputs are Pooled). Units follow those of x and y. It returns
// the fit and s.
//
// Errors: those of fit.Poly, wrapped (fewer than 3 points:
// fit.ErrTooFewPoints; all x equal: fit.ErrSingular; mismatched lengths,
// NaN/Inf data or x0: fit.ErrInvalidInput). The inputs are not modified.
// FitLineLS is safe for concurrent use.
func FitLineLS(x, y []float64, x0 float64) (LineFit, float64, error) {
	r, err := fit.Poly(x, y, 1, x0)
	if err != nil {
		return LineFit{}, 0, fmt.Errorf("uncertainty.FitLineLS: %w", err)
	}
	n := len(x)
	sd := r.ResidualSD
	f := LineFit{
		X0: x0, B0: r.Coef[0], B1: r.Coef[1],
		CovRandom: [2][2]float64{{r.Cov[0][0], r.Cov[0][1]}, {r.Cov[1][0], r.Cov[1][1]}},
		Residuals: r.Residuals, ResidualDOF: r.DOF, Chi2: math.NaN(),
	}
	f.Cov = f.CovRandom
	ones := make([]float64, n)
	for i := range ones {
		ones[i] = 1
	}
	a0, a1 := lsWeights(x, ones, x0)
	f.Inputs = make([]Input, n)
	for i := range n {
		f.Inputs[i] = Input{Name: NameResidualScatter, Point: i, Kind: KindA, U: sd,
			DOF: float64(r.DOF), Pooled: true, C: [2]float64{-a0[i], -a1[i]}}
	}
	f.finish([]string{NameResidualScatter})
	return f, sd, nil
}

// addShared adds the Sweep's four shared systematic inputs (sysInputs, with
// their sensitivities at f's estimates) to f.Inputs and CovSys, and sets Cov =
// CovRandom + CovSys.
func (f *LineFit) addShared(s Sweep) {
	for _, in := range s.sysInputs([3]float64{f.B0, f.B1, 0}) {
		f.Inputs = append(f.Inputs, Input{Name: in.name, Point: -1, Kind: in.kind,
			U: in.u, DOF: in.dof, C: [2]float64{in.c[0], in.c[1]}})
		for j := range 2 {
			for k := range 2 {
				f.CovSys[j][k] += in.c[j] * in.c[k] * in.u * in.u
			}
		}
	}
	for j := range 2 {
		for k := range 2 {
			f.Cov[j][k] = f.CovRandom[j][k] + f.CovSys[j][k]
		}
	}
}

// finish fills the budgets and the dof from the inputs.
func (f *LineFit) finish(rows []string) {
	f.Budget = f.budget([2]float64{1, 0}, rows)
	f.BudgetB1 = f.budget([2]float64{0, 1}, rows)
	_, f.DOFB0 = Combine(f.Budget)
	_, f.DOFB1 = Combine(f.BudgetB1)
}

// validate checks a Sweep's contract (not the data values, which fit checks).
func (s Sweep) validate(fn string) error {
	n := len(s.X)
	bad := func(format string, args ...any) error {
		return fmt.Errorf("%s: %w: "+format, append([]any{fn, ErrInvalidInput}, args...)...)
	}
	if len(s.Y) != n {
		return bad("len(X) = %d but len(Y) = %d", n, len(s.Y))
	}
	if s.URandom != nil && len(s.URandom) != n {
		return bad("len(X) = %d but len(URandom) = %d", n, len(s.URandom))
	}
	if s.DOFRandom != nil && len(s.DOFRandom) != n {
		return bad("len(X) = %d but len(DOFRandom) = %d", n, len(s.DOFRandom))
	}
	for i, v := range s.URandom {
		if !(v >= 0 && !math.IsInf(v, 1)) {
			return bad("URandom[%d] is %v; it must be finite and ≥ 0", i, v)
		}
		if v > 0 && (s.DOFRandom == nil || !(s.DOFRandom[i] > 0)) {
			d := "missing"
			if s.DOFRandom != nil {
				d = fmt.Sprint(s.DOFRandom[i])
			}
			return bad("URandom[%d] = %g needs DOFRandom[%d] > 0, got %s", i, v, i, d)
		}
	}
	finiteNonNeg := func(name string, v float64) error {
		if !(v >= 0 && !math.IsInf(v, 1)) {
			return bad("%s is %v; it must be finite and ≥ 0", name, v)
		}
		return nil
	}
	for _, c := range []struct {
		name string
		v    float64
	}{
		{"MeterResolution", s.MeterResolution},
		{"Meter.OfReading", s.Meter.OfReading}, {"Meter.OfRange", s.Meter.OfRange}, {"Meter.Range", s.Meter.Range},
		{"Source.OfReading", s.Source.OfReading}, {"Source.OfRange", s.Source.OfRange}, {"Source.Range", s.Source.Range},
	} {
		if err := finiteNonNeg(c.name, c.v); err != nil {
			return err
		}
	}
	if math.IsNaN(s.X0) || math.IsInf(s.X0, 0) {
		return bad("X0 is %v", s.X0)
	}
	if z := s.SourceZero; z != nil {
		if err := finiteNonNeg("SourceZero.U", z.U); err != nil {
			return err
		}
		if !(z.DOF > 0) {
			return bad("SourceZero.DOF is %v; it must be > 0", z.DOF)
		}
	}
	return nil
}

// pointU validates the Sweep and returns the standard uncertainty u_i of
// each point's random part (URandom_i and the resolution's uRes in
// quadrature), the weights' scale for the fit. When every u_i is 0
// (noRandom) it returns u_i = 1, which gives the ordinary least-squares fit.
// Some but not all u_i zero is an error wrapping ErrInvalidInput.
func (s Sweep) pointU(fn string) (u []float64, uRes float64, noRandom bool, err error) {
	n := len(s.X)
	if err := s.validate(fn); err != nil {
		return nil, 0, false, err
	}
	uRes = s.MeterResolution / (2 * math.Sqrt(3))
	u = make([]float64, n)
	zeros := 0
	for i := range n {
		u[i] = math.Hypot(s.uRandom(i), uRes)
		if u[i] == 0 {
			zeros++
		}
	}
	noRandom = zeros == n
	if zeros > 0 && !noRandom {
		return nil, 0, false, fmt.Errorf("%s: %w: %d of %d points have zero random uncertainty (URandom 0 and no MeterResolution); give every point an uncertainty or none", fn, ErrInvalidInput, zeros, n)
	}
	if noRandom {
		for i := range u {
			u[i] = 1
		}
	}
	return u, uRes, noRandom, nil
}

// errorInput is one input quantity of the package doc's model before its
// sensitivity to the coefficients of a particular fit is attached: the
// per-point ones (point ≥ 0) from pointInputs, the shared systematic ones
// with their sensitivities c to (β0, β1, β2) from sysInputs.
type errorInput struct {
	name, kind string
	point      int
	u, dof     float64
	pooled     bool
	c          [3]float64
}

// pointInputs lists the per-point random inputs of the Sweep: the Type A
// scatter of each point with a positive URandom, then the resolution of
// every point when uRes > 0.
func (s Sweep) pointInputs(uRes float64) []errorInput {
	n := len(s.X)
	out := make([]errorInput, 0, 2*n)
	for i := range n {
		if ur := s.uRandom(i); ur > 0 {
			out = append(out, errorInput{name: NameRepeatability, kind: KindA, point: i, u: ur, dof: s.DOFRandom[i], pooled: s.PooledRandom})
		}
	}
	if uRes > 0 {
		for i := range n {
			out = append(out, errorInput{name: NameResolution, kind: KindB, point: i, u: uRes, dof: math.Inf(1)})
		}
	}
	return out
}

// sysInputs returns the four shared systematic errors of the Sweep's specs
// (rectangular, u = a/√3, dof ∞) with their sensitivities c_k = ∂β_k/∂error
// for the model η = β0 + β1·(ξ − X0) + β2·(ξ − X0)², evaluated at the
// estimates b (b[2] = 0 for the straight line; see the package doc):
//
//   - meter gain g_m scales every y: c = −b;
//   - meter offset o_m shifts every y: c = (−1, 0, 0);
//   - source gain g_s: ξ − X0 = (x − X0)(1 + g_s) + X0·g_s, so to first
//     order c = (−b1·X0, −(b1 + 2·b2·X0), −2·b2);
//   - source offset o_s: ξ − X0 = (x − X0) + o_s, so c = (−b1, −2·b2, 0).
//
// The straight line's sensitivities are these with b2 = 0, bit for bit
// (0 − 2·b2 rather than −2·b2 keeps a +0 there).
func (s Sweep) sysInputs(b [3]float64) [4]errorInput {
	sq3 := math.Sqrt(3)
	x0 := s.X0
	in := [4]errorInput{
		{name: NameMeterGain, u: s.Meter.OfReading / sq3, c: [3]float64{-b[0], -b[1], -b[2]}},
		{name: NameMeterOffset, u: s.Meter.OfRange * s.Meter.Range / sq3, c: [3]float64{-1, 0, 0}},
		{name: NameSourceGain, u: s.Source.OfReading / sq3, c: [3]float64{-b[1] * x0, -(b[1] + 2*b[2]*x0), 0 - 2*b[2]}},
		{name: NameSourceOffset, u: s.Source.OfRange * s.Source.Range / sq3, c: [3]float64{-b[1], 0 - 2*b[2], 0}},
	}
	for i := range in {
		in[i].kind, in[i].point, in[i].dof = KindB, -1, math.Inf(1)
	}
	if z := s.SourceZero; z != nil {
		in[3].u, in[3].dof, in[3].kind = z.U, z.DOF, z.Evaluation()
	}
	return in
}

func (s Sweep) uRandom(i int) float64 {
	if s.URandom == nil {
		return 0
	}
	return s.URandom[i]
}

// weightedCentre returns what a straight-line fit with weights 1/u[i]² is centred
// with: the weights w[i] = (umin/u[i])², normalised by umin, the smallest u (the
// normalisation cancels in every result), their sum sw, the weighted mean xm of x
// and sdd = Σ w[i]·(x[i] − xm)². The caller guarantees len(u) = len(x) ≥ 1 and
// finite x and u > 0.
func weightedCentre(x, u []float64, umin float64) (w []float64, sw, xm, sdd float64) {
	n := len(x)
	w = make([]float64, n)
	var swx float64
	for i := range n {
		r := umin / u[i]
		w[i] = r * r
		sw += w[i]
		swx += w[i] * x[i]
	}
	xm = swx / sw
	for i := range n {
		d := x[i] - xm
		sdd += w[i] * d * d
	}
	return w, sw, xm, sdd
}

// lsWeights returns the weights a0[i], a1[i] of y[i] in the weighted
// least-squares coefficients b0 = Σ a0[i]·y[i], b1 = Σ a1[i]·y[i] of the
// line y = b0 + b1·(x − x0) with weights 1/u[i]². The caller guarantees
// valid input (the fit has succeeded).
func lsWeights(x, u []float64, x0 float64) (a0, a1 []float64) {
	n := len(x)
	umin := math.Inf(1)
	for _, v := range u {
		umin = math.Min(umin, v)
	}
	w, sw, xm, sdd := weightedCentre(x, u, umin)
	a0, a1 = make([]float64, n), make([]float64, n)
	for i := range n {
		a1[i] = w[i] * (x[i] - xm) / sdd
		a0[i] = w[i]/sw + (x0-xm)*a1[i]
	}
	return a0, a1
}

// Predict returns the fitted value y = B0 + B1·(x − X0) at stimulus x (V)
// and its standard uncertainty u (V) from Cov with gradient (1, x − X0),
// correlations included. It is the uncertainty of the line (the DUT's
// transfer at x), not of a new single reading. Predict on the zero LineFit
// returns 0, 0.
func (f LineFit) Predict(x float64) (y, u float64) {
	t := x - f.X0
	return f.B0 + f.B1*t, f.linearU([2]float64{1, t})
}

// PredictDOF is Predict plus the Welch–Satterthwaite effective degrees of
// freedom of u, from the inputs (Linear with g = (1, x − X0)).
func (f LineFit) PredictDOF(x float64) (y, u, dof float64) {
	t := x - f.X0
	u, dof = f.Linear([2]float64{1, t})
	return f.B0 + f.B1*t, u, dof
}

// Linear returns the standard uncertainty u = sqrt(gᵀ·Cov·g) of the linear
// combination q = g[0]·b0 + g[1]·b1 (the first-order propagation of any
// derived result q(b0, b1) with g its gradient at the estimates) and its
// Welch–Satterthwaite effective dof over the inputs. u is in the unit of q.
// For a LineFit without Inputs the dof is ∞.
func (f LineFit) Linear(g [2]float64) (u, dof float64) {
	_, dof = Combine(f.LinearBudget(g))
	return f.linearU(g), dof
}

// LinearBudget returns the budget of q = g[0]·b0 + g[1]·b1: one Component
// per row name of the Inputs, in order of first appearance, with U =
// sqrt(Σ (g·C_j)²·U_j²) over the row's inputs (unit of q) and DOF by
// Welch–Satterthwaite among them (the common DOF for Pooled inputs; ∞ for a
// row whose U is 0 unless pooled). Budget is LinearBudget({1, 0}), BudgetB1
// LinearBudget({0, 1}).
func (f LineFit) LinearBudget(g [2]float64) []Component {
	var rows []string
	for _, in := range f.Inputs {
		if !slices.Contains(rows, in.Name) {
			rows = append(rows, in.Name)
		}
	}
	return f.budget(g, rows)
}

func (f LineFit) budget(g [2]float64, rows []string) []Component {
	return rowBudget(rows, len(f.Inputs), func(i int) (Input, float64) {
		in := f.Inputs[i]
		return in, (g[0]*in.C[0] + g[1]*in.C[1]) * in.U
	})
}

// rowBudget returns one Component per name in rows over the n inputs that
// input(i) gives with their contribution uq (unit of the quantity): U =
// sqrt(Σ uq²) over the inputs of that name, DOF by Welch–Satterthwaite among
// them (the common DOF for Pooled inputs; ∞ for a row whose U is 0 unless
// pooled). Only Name, Kind, Pooled and DOF of the Input are read.
func rowBudget(rows []string, n int, input func(i int) (in Input, uq float64)) []Component {
	out := make([]Component, 0, len(rows))
	for _, name := range rows {
		var cs []Component
		kind, pooled, pooledDOF := KindB, false, math.Inf(1)
		if name == NameRepeatability || name == NameResidualScatter {
			kind = KindA
		}
		for i := range n {
			in, uq := input(i)
			if in.Name != name {
				continue
			}
			kind = in.Kind
			if in.Pooled {
				pooled, pooledDOF = true, in.DOF
			}
			cs = append(cs, Component{U: uq, DOF: in.DOF})
		}
		u, dof := Combine(cs)
		if pooled {
			dof = pooledDOF
		}
		out = append(out, Component{Name: name, U: u, DOF: dof, Kind: kind})
	}
	return out
}

func (f LineFit) linearU(g [2]float64) float64 {
	v := 0.0
	for i := range 2 {
		for j := range 2 {
			v += g[i] * f.Cov[i][j] * g[j]
		}
	}
	return math.Sqrt(math.Max(v, 0))
}

// StdUnc returns the standard uncertainties sqrt(Cov[0][0]) of b0 (V) and
// sqrt(Cov[1][1]) of b1 (V/V).
func (f LineFit) StdUnc() (u0, u1 float64) {
	return math.Sqrt(f.Cov[0][0]), math.Sqrt(f.Cov[1][1])
}

// Corr returns the correlation coefficient r(b0, b1) = Cov[0][1]/(u(b0)·u(b1))
// (dimensionless); NaN when either variance is zero.
func (f LineFit) Corr() float64 {
	return f.Cov[0][1] / math.Sqrt(f.Cov[0][0]*f.Cov[1][1])
}
