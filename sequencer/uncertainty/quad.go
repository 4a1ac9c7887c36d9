package uncertainty

import (
	"fmt"
	"math"

	"trimline/sequencer/fit"
)

// QuadInput is one input quantity of a QuadFit's uncertainty model, as Input
// is for a LineFit: an error with best estimate 0 and standard uncertainty U
// (V for offsets and per-point errors, 1 for gains) with DOF, and C =
// (∂β0/∂input, ∂β1/∂input, ∂β2/∂input), so that it contributes C·Cᵀ·U² to
// the covariance of (b0, b1, b2).
type QuadInput struct {
	Name  string // budget row (one of the Name… constants)
	Point int    // index of the sweep point for per-point inputs, −1 for shared ones
	Kind  string // KindA or KindB
	U     float64
	DOF   float64 // math.Inf(1) = infinite
	// Pooled: as Input.Pooled (one pooled standard deviation behind every point).
	Pooled bool
	C      [3]float64
}

// QuadFit is the quadratic y = B[0] + B[1]·(x − X0) + B[2]·(x − X0)² fitted
// to a Sweep with uncertainty, the order-2 counterpart of LineFit. B[0] and
// the residuals are in V, B[1] in V/V, B[2] in 1/V (V per V²); covariances
// are in the products of those units.
type QuadFit struct {
	X0 float64 // centring point, V of stimulus
	B  [3]float64
	// CovRandom is the covariance from the random (Type A + resolution)
	// parts, (XᵀWX)⁻¹ with weights 1/u_i²; zero when no point has a random
	// uncertainty.
	CovRandom [3][3]float64
	// CovSys is the covariance from the four systematic errors every point
	// shares (meter gain and offset, source gain and offset).
	CovSys [3][3]float64
	// Cov is CovRandom + CovSys.
	Cov [3][3]float64
	// DOFB0, DOFB1 and DOFB2 are the Welch–Satterthwaite effective dof of
	// u(b0), u(b1) and u(b2) over the Inputs.
	DOFB0, DOFB1, DOFB2 float64
	Residuals           []float64 // y_i − ŷ_i, V, in input order
	ResidualDOF         int       // n − 3
	// Chi2 is Σ(residual_i/u_i)² (dimensionless, expected ≈ ResidualDOF
	// when the u_i explain the scatter); NaN when there is no random
	// uncertainty to weight with.
	Chi2 float64
	// Inputs are the input quantities behind Cov: the per-point random ones
	// first, then the four systematic ones in the order of the Name…
	// constants.
	Inputs []QuadInput
}

// FitQuadratic fits y = b0 + b1·(x − X0) + b2·(x − X0)² to a Sweep with
// FitLine's weights (1/u_i², u_i² = URandom_i² + (MeterResolution/(2√3))²;
// ordinary least squares when every u_i is 0) and evaluates the covariance
// of (b0, b1, b2) from the random parts and from the four systematic errors
// of the package doc's model, now with the quadratic transfer η = β0 +
// β1·(ξ − X0) + β2·(ξ − X0)²:
//
//   - meter gain g_m scales every y: ∂β_k/∂g_m = −b_k;
//   - meter offset o_m moves only the constant: ∂β/∂o_m = (−1, 0, 0);
//   - source gain g_s: ξ − X0 = (x − X0)(1 + g_s) + X0·g_s, so to first
//     order ∂β/∂g_s = (−b1·X0, −(b1 + 2·b2·X0), −2·b2);
//   - source offset o_s: ξ − X0 = (x − X0) + o_s, so ∂β/∂o_s = (−b1,
//     −2·b2, 0).
//
// With b2 = 0 these are FitLine's. Per-point inputs have sensitivities
// −a_ki, a_ki the weight of y_i in b_k. The dof are Welch–Satterthwaite as
// in FitLine. A centring point X0 near the middle of the sweep keeps b1
// nearly uncorrelated with b0 and b2.
//
// Errors: those of FitLine for the Sweep's contract (wrapping
// ErrInvalidInput), and of fit.Weighted, wrapped (fewer than 3 points:
// fit.ErrTooFewPoints; fewer than 3 distinct x: fit.ErrSingular). The Sweep
// is not modified. FitQuadratic is safe for concurrent use.
func FitQuadratic(s Sweep) (QuadFit, error) {
	const fn = "uncertainty.FitQuadratic"
	u, uRes, noRandom, err := s.pointU(fn)
	if err != nil {
		return QuadFit{}, err
	}
	r, err := fit.Weighted(s.X, s.Y, u, 2, s.X0, true)
	if err != nil {
		return QuadFit{}, fmt.Errorf("%s: %w", fn, err)
	}
	f := QuadFit{X0: s.X0, Residuals: r.Residuals, ResidualDOF: r.DOF, Chi2: r.RSS}
	copy(f.B[:], r.Coef)
	if noRandom {
		f.Chi2 = math.NaN()
	} else {
		for j := range 3 {
			copy(f.CovRandom[j][:], r.Cov[j])
		}
	}
	points := s.pointInputs(uRes)
	sys := s.sysInputs(f.B)
	f.Inputs = make([]QuadInput, 0, len(points)+len(sys))
	for _, in := range points {
		// b = (XᵀWX)⁻¹XᵀW·y, so the weight of y_i in b_k is Σ_j
		// Cov_kj·t_i^j/u_i² with t_i = x_i − X0 (r.Cov is (XᵀWX)⁻¹ here).
		i := in.point
		t := s.X[i] - s.X0
		w := 1 / (u[i] * u[i])
		var c [3]float64
		for k := range 3 {
			c[k] = -(r.Cov[k][0] + r.Cov[k][1]*t + r.Cov[k][2]*t*t) * w
		}
		f.Inputs = append(f.Inputs, QuadInput{Name: in.name, Point: i, Kind: in.kind, U: in.u, DOF: in.dof, Pooled: in.pooled, C: c})
	}
	for _, in := range sys {
		f.Inputs = append(f.Inputs, QuadInput{Name: in.name, Point: -1, Kind: in.kind, U: in.u, DOF: in.dof, C: in.c})
		for j := range 3 {
			for k := range 3 {
				f.CovSys[j][k] += in.c[j] * in.c[k] * in.u * in.u
			}
		}
	}
	for j := range 3 {
		for k := range 3 {
			f.Cov[j][k] = f.CovRandom[j][k] + f.CovSys[j][k]
		}
	}
	_, f.DOFB0 = f.Linear([3]float64{1, 0, 0})
	_, f.DOFB1 = f.Linear([3]float64{0, 1, 0})
	_, f.DOFB2 = f.Linear([3]float64{0, 0, 1})
	return f, nil
}

// Linear returns the standard uncertainty u = sqrt(gᵀ·Cov·g) of the linear
// combination q = g[0]·b0 + g[1]·b1 + g[2]·b2 (first-order propagation of
// any derived result q(b0, b1, b2) with g its gradient at the estimates) and
// its Welch–Satterthwaite effective dof over the Inputs, as LineFit.Linear
// does. u is in the unit of q. For a QuadFit without Inputs the dof is ∞.
func (f QuadFit) Linear(g [3]float64) (u, dof float64) {
	_, dof = Combine(f.LinearBudget(g))
	v := 0.0
	for i := range 3 {
		for j := range 3 {
			v += g[i] * f.Cov[i][j] * g[j]
		}
	}
	return math.Sqrt(math.Max(v, 0)), dof
}

// LinearBudget returns the budget of q = g·(b0, b1, b2): one Component per
// row name of the Name… constants that FitLine lists (NameRepeatability …
// NameSourceOffset, zero rows included), with U = sqrt(Σ (g·C_j)²·U_j²)
// over the row's inputs (unit of q) and DOF by Welch–Satterthwaite among
// them. Combine of it gives Linear(g).
func (f QuadFit) LinearBudget(g [3]float64) []Component {
	rows := []string{NameRepeatability, NameResolution, NameMeterGain, NameMeterOffset, NameSourceGain, NameSourceOffset}
	return rowBudget(rows, len(f.Inputs), func(i int) (Input, float64) {
		in := f.Inputs[i]
		return Input{Name: in.Name, Kind: in.Kind, DOF: in.DOF, Pooled: in.Pooled}, (g[0]*in.C[0] + g[1]*in.C[1] + g[2]*in.C[2]) * in.U
	})
}

// Predict returns the fitted value y = B[0] + B[1]·t + B[2]·t², t = x − X0,
// at stimulus x (V), its standard uncertainty u (V) from Cov with gradient
// (1, t, t²), correlations included, and the Welch–Satterthwaite dof of u.
// It is the uncertainty of the curve, not of a new single reading.
func (f QuadFit) Predict(x float64) (y, u, dof float64) {
	t := x - f.X0
	u, dof = f.Linear([3]float64{1, t, t * t})
	return f.B[0] + (f.B[1]+f.B[2]*t)*t, u, dof
}

// StdUnc returns sqrt of the diagonal of Cov: u(b0) in V, u(b1) in V/V,
// u(b2) in 1/V.
func (f QuadFit) StdUnc() [3]float64 {
	return [3]float64{math.Sqrt(f.Cov[0][0]), math.Sqrt(f.Cov[1][1]), math.Sqrt(f.Cov[2][2])}
}
