package uncertainty

import "math"

// LinearCombination returns sqrt(gᵀ·C·g), the standard uncertainty of the
// linear combination Σ g_i·q_i of quantities q with covariance matrix C
// (JCGM 100 eq. 13 with sensitivity coefficients g). Units: those of the
// combination (g_i in its unit per unit of q_i). A slightly negative
// quadratic form from rounding is taken as 0. It does not fail: it returns
// NaN when C is not len(g)×len(g) or holds NaN. The arguments are not
// modified.
func LinearCombination(grad []float64, cov [][]float64) float64 {
	n := len(grad)
	if len(cov) != n {
		return math.NaN()
	}
	v := 0.0
	for i := range n {
		if len(cov[i]) != n {
			return math.NaN()
		}
		for j := range n {
			v += grad[i] * cov[i][j] * grad[j]
		}
	}
	if math.IsNaN(v) {
		return v
	}
	return math.Sqrt(math.Max(v, 0))
}

// ResidualU returns the standard uncertainty of each residual of a
// weighted straight-line fit with weights 1/u_i²: u_i·sqrt(1 − h_ii), where
// h_ii = w_i·(1/Σw + (x_i − x̄_w)²/Σ w(x − x̄_w)²) is the diagonal of the hat
// matrix (x̄_w the weighted mean of x). It covers the random part only: the
// shared systematic errors of FitLine move the residuals by second-order
// amounts only. Units of u. The centring point of the fit does not matter.
// It does not fail: it returns nil when len(u) ≠ len(x), there are fewer
// than 2 points, all x are equal, or an x or u is not finite (u must also be
// > 0). The arguments are not modified.
func ResidualU(x, u []float64) []float64 {
	n := len(x)
	if len(u) != n || n < 2 {
		return nil
	}
	umin, xmax := math.Inf(1), 0.0
	for i := range n {
		if math.IsNaN(x[i]) || math.IsInf(x[i], 0) || !(u[i] > 0) || math.IsInf(u[i], 1) {
			return nil
		}
		umin = math.Min(umin, u[i])
		xmax = math.Max(xmax, math.Abs(x[i]))
	}
	w, sw, xm, sdd := weightedCentre(x, u, umin)
	// All x equal leaves only rounding in x − x̄_w.
	if tiny := 16 * float64(n) * 0x1p-52 * xmax; !(sdd > sw*tiny*tiny) {
		return nil
	}
	out := w // reuse
	for i := range n {
		d := x[i] - xm
		h := w[i] * (1/sw + d*d/sdd)
		out[i] = u[i] * math.Sqrt(math.Max(0, 1-h))
	}
	return out
}
