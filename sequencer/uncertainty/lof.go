package uncertainty

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// Methods of a lack-of-fit test (LOF.Method).
const (
	// LOFChi2 is the reduced chi-square χ²/ν = Σ((y_i − ŷ_i)/u_i)²/(n − p),
	// tested against the χ² distribution with ν = n − p dof.
	LOFChi2 = "chi2"
	// LOFF is the F test of lack of fit against pure error from repeated
	// stimulus levels (NIST/SEMATECH e-Handbook of Statistical Methods,
	// §4.4.4 and the load cell case study §4.6.1.5).
	LOFF = "F"
)

// ErrNoLackOfFitTest is wrapped by LackOfFit's error when neither test can be
// made: no stimulus level repeats with scatter (or the levels leave no
// lack-of-fit dof) and no uncertainties were given, or n ≤ params.
var ErrNoLackOfFitTest = errors.New("no lack-of-fit test possible")

// LOF is the result of a lack-of-fit test of a fitted curve.
type LOF struct {
	Method string // LOFChi2 or LOFF
	// Statistic is χ²/ν for LOFChi2 and F = (SS_LOF/DOF1)/(SS_PE/DOF2) for
	// LOFF; dimensionless, about 1 when the model fits.
	Statistic float64
	// DOF1 is ν = n − params for LOFChi2 and levels − params for LOFF;
	// DOF2 is 0 for LOFChi2 and n − levels (the pure-error dof) for LOFF.
	DOF1, DOF2 int
	// P is the upper-tail probability of Statistic under the hypothesis
	// that the model fits: a small P (say < 0.05) is evidence of lack of fit.
	P float64
	// Levels is the number of distinct stimulus values x.
	Levels int
	// SSLOF and SSPE are, for LOFF, the lack-of-fit and pure-error sums of
	// squares Σ(ȳ_g − ŷ_i)² and Σ(y_i − ȳ_g)² (units of y squared), whose
	// mean squares make Statistic; both 0 for LOFChi2.
	SSLOF, SSPE float64
}

// LackOfFit tests whether a fitted curve with params coefficients (2 for a
// line, 3 for a quadratic) describes the points (x_i, y_i), given the fitted
// values ŷ_i = fitted[i] (units of y) and, optionally, the standard
// uncertainty u_i of each y_i (units of y; nil when unknown).
//
// When some stimulus level repeats (points with the very same x form a
// group), there are more levels than params, and the scatter within the
// groups is not zero, it is the e-Handbook's F test against pure error
// (NIST/SEMATECH e-Handbook of Statistical Methods §4.4.4, worked in
// §4.6.1.5): SS_PE = Σ(y_i − ȳ_g)² over the groups, SS_LOF = Σ(ȳ_g − ŷ_i)²
// over the points, F = [SS_LOF/(levels − params)]/[SS_PE/(n − levels)], P
// its upper tail in F(levels − params, n − levels). The F test is unweighted; u is not used
// by it. Otherwise, when u is given, it is the reduced chi-square χ²/ν with
// ν = n − params and P the upper tail of χ²(ν) at χ² = Σ((y_i − ŷ_i)/u_i)².
//
// Errors: ErrInvalidInput (wrapped) when the lengths differ, params < 1, a
// value is NaN or ±Inf, a u_i is not > 0, or a sum of squares or the
// statistic overflows; ErrNoLackOfFitTest (wrapped) when neither test
// applies (no usable replicates and u nil, or n ≤ params). The arguments
// are not modified. LackOfFit is safe for concurrent use.
func LackOfFit(x, y, u, fitted []float64, params int) (LOF, error) {
	const fn = "uncertainty.LackOfFit"
	n := len(x)
	bad := func(format string, args ...any) error {
		return fmt.Errorf("%s: %w: "+format, append([]any{fn, ErrInvalidInput}, args...)...)
	}
	if len(y) != n || len(fitted) != n || (u != nil && len(u) != n) {
		return LOF{}, bad("lengths differ: x %d, y %d, fitted %d, u %d", n, len(y), len(fitted), len(u))
	}
	if params < 1 {
		return LOF{}, bad("params is %d; it must be ≥ 1", params)
	}
	for i := range n {
		for _, v := range [3]float64{x[i], y[i], fitted[i]} {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return LOF{}, bad("point %d: x %v, y %v, fitted %v; all must be finite", i, x[i], y[i], fitted[i])
			}
		}
		if u != nil && !(u[i] > 0 && !math.IsInf(u[i], 1)) {
			return LOF{}, bad("u[%d] is %v; it must be finite and > 0", i, u[i])
		}
	}

	// Groups of identical x, in order of first appearance.
	group := make([]int, n)
	index := make(map[float64]int, n)
	for i, v := range x {
		g, ok := index[v]
		if !ok {
			g = len(index)
			index[v] = g
		}
		group[i] = g
	}
	levels := len(index)
	out := LOF{Levels: levels}

	if dof1, dof2 := levels-params, n-levels; dof1 > 0 && dof2 > 0 {
		mean := groupMeans(y, group, levels)
		var ssPE, ssLOF float64
		for i := range n {
			d, e := y[i]-mean[group[i]], mean[group[i]]-fitted[i]
			ssPE += d * d
			ssLOF += e * e
		}
		if math.IsInf(ssPE, 0) || math.IsInf(ssLOF, 0) {
			return LOF{}, bad("the sums of squares overflow; rescale y")
		}
		if ssPE > 0 {
			out.Method, out.DOF1, out.DOF2 = LOFF, dof1, dof2
			out.SSLOF, out.SSPE = ssLOF, ssPE
			out.Statistic = (ssLOF / float64(dof1)) / (ssPE / float64(dof2))
			if math.IsInf(out.Statistic, 0) {
				return LOF{}, bad("F overflows (pure error %g against lack of fit %g)", ssPE, ssLOF)
			}
			out.P = distuv.F{D1: float64(dof1), D2: float64(dof2)}.Survival(out.Statistic)
			return out, nil
		}
	}
	nu := n - params
	switch {
	case nu <= 0:
		return LOF{}, fmt.Errorf("%s: %w: %d points for %d parameters leave no residual dof", fn, ErrNoLackOfFitTest, n, params)
	case u == nil:
		return LOF{}, fmt.Errorf("%s: %w: no stimulus level repeats with scatter (%d levels, %d points) and no uncertainties were given", fn, ErrNoLackOfFitTest, levels, n)
	}
	var chi2 float64
	for i := range n {
		r := (y[i] - fitted[i]) / u[i]
		chi2 += r * r
	}
	if math.IsInf(chi2, 0) {
		return LOF{}, bad("χ² overflows (residuals far larger than their u)")
	}
	out.Method, out.DOF1 = LOFChi2, nu
	out.Statistic = chi2 / float64(nu)
	out.P = distuv.ChiSquared{K: float64(nu)}.Survival(chi2)
	return out, nil
}

// groupMeans returns the mean of y over each of the levels groups (group[i]
// is the group of y[i]), with one correction pass for accuracy.
func groupMeans(y []float64, group []int, levels int) []float64 {
	sum := make([]float64, levels)
	count := make([]float64, levels)
	for i, v := range y {
		sum[group[i]] += v
		count[group[i]]++
	}
	mean := make([]float64, levels)
	for g := range mean {
		mean[g] = sum[g] / count[g]
	}
	corr := make([]float64, levels)
	for i, v := range y {
		corr[group[i]] += v - mean[group[i]]
	}
	for g := range mean {
		mean[g] += corr[g] / count[g]
	}
	return mean
}

// PointU returns the standard uncertainty u_i (V) of each point's random
// part that FitLine and FitQuadratic weight with, URandom_i and the meter
// resolution's q/(2√3) in quadrature: the u to give LackOfFit for a fitted
// Sweep. It returns nil when every u_i is 0 (LackOfFit then needs repeated
// levels). Errors: those of FitLine for the Sweep's contract, wrapping
// ErrInvalidInput. The Sweep is not modified.
func (s Sweep) PointU() ([]float64, error) {
	u, _, noRandom, err := s.pointU("uncertainty.Sweep.PointU")
	if err != nil || noRandom {
		return nil, err
	}
	return u, nil
}
