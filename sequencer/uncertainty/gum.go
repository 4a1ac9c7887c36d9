package uncertainty

import (
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// Kinds of evaluation (JCGM 100 §4.2, §4.3), used in Component.Kind.
const (
	KindA = "A" // statistical analysis of a series of observations
	KindB = "B" // other means: specifications, resolution, certificates
)

// normalDOF is the degrees of freedom above which CoverageFactor uses the
// normal distribution instead of Student's t; the two agree there to better
// than 1e-7 relative.
const normalDOF = 1e7

// Component is one contribution to a combined standard uncertainty. U is the
// standard uncertainty in the unit of the measurand (after multiplying by its
// sensitivity coefficient); DOF is its degrees of freedom (math.Inf(1) =
// infinite). Kind is KindA or KindB.
type Component struct {
	Name string
	U    float64
	DOF  float64
	Kind string
}

// TypeA evaluates a series of repeated observations (JCGM 100 §4.2): it
// returns their arithmetic mean (unit of the values) and a KindA component
// with U = s/√n, the experimental standard deviation of the mean, and DOF =
// n − 1. It does not fail: with fewer than two values U is NaN and DOF is 0
// (the mean is NaN for no values); NaN or ±Inf values give NaN results. The
// values are not modified.
func TypeA(name string, values []float64) (mean float64, c Component) {
	n := len(values)
	c = Component{Name: name, U: math.NaN(), DOF: 0, Kind: KindA}
	if n == 0 {
		return math.NaN(), c
	}
	for _, v := range values {
		mean += v
	}
	mean /= float64(n)
	// One correction pass makes the mean accurate even when the values
	// share a large offset.
	var corr float64
	for _, v := range values {
		corr += v - mean
	}
	mean += corr / float64(n)
	if n < 2 {
		return mean, c
	}
	var ss float64
	for _, v := range values {
		d := v - mean
		ss += d * d
	}
	s := math.Sqrt(ss / float64(n-1))
	c.U = s / math.Sqrt(float64(n))
	c.DOF = float64(n - 1)
	return mean, c
}

// Rectangular returns the KindB component of a quantity known only to lie
// within ±halfWidth of its estimate, with equal probability anywhere inside:
// U = a/√3 (JCGM 100 §4.3.7), DOF = ∞ (the limits are taken as exactly
// known, JCGM 100 G.4.2). U is in the unit of halfWidth; a negative
// halfWidth is taken by its magnitude.
func Rectangular(name string, halfWidth float64) Component {
	return Component{Name: name, U: math.Abs(halfWidth) / math.Sqrt(3), DOF: math.Inf(1), Kind: KindB}
}

// Resolution returns the KindB component of an indication rounded to a
// digital step (one count of the least significant digit): the rounding error
// is rectangular within half a count, U = step/(2√3) (JCGM 100 F.2.2.1), DOF
// = ∞. U is in the unit of step.
func Resolution(name string, step float64) Component {
	return Rectangular(name, step/2)
}

// Combine returns the combined standard uncertainty uc = sqrt(Σ U_i²) of
// uncorrelated components (JCGM 100 eq. 10 with the sensitivities already in
// U; negative U are taken by magnitude) and the Welch–Satterthwaite effective
// degrees of freedom ν_eff = uc⁴ / Σ(U_i⁴/ν_i) (JCGM 100 G.2b). Components
// with U = 0 do not enter ν_eff; components with infinite DOF contribute 0
// to the denominator, so ν_eff = ∞ when all have infinite DOF (and for an
// empty list, where uc = 0). A nonzero component with DOF ≤ 0 gives ν_eff =
// 0; a NaN U or DOF gives NaN for both results. The sums are scaled, so
// they neither overflow nor underflow for any finite U.
func Combine(cs []Component) (uc, dofEff float64) {
	scale := 0.0
	for _, c := range cs {
		if math.IsNaN(c.U) || math.IsNaN(c.DOF) {
			return math.NaN(), math.NaN()
		}
		scale = math.Max(scale, math.Abs(c.U))
	}
	if scale == 0 {
		return 0, math.Inf(1)
	}
	if math.IsInf(scale, 1) {
		return math.Inf(1), math.NaN()
	}
	var s2, den float64
	for _, c := range cs {
		r := math.Abs(c.U) / scale
		if r == 0 {
			continue
		}
		s2 += r * r
		switch {
		case math.IsInf(c.DOF, 1):
		case c.DOF <= 0:
			den = math.Inf(1)
		default:
			den += (r * r) * (r * r) / c.DOF
		}
	}
	uc = scale * math.Sqrt(s2)
	if den == 0 {
		return uc, math.Inf(1)
	}
	return uc, s2 * s2 / den
}

// CoverageFactor returns the coverage factor k for a two-sided coverage
// probability p (a fraction, e.g. 0.95 or 0.9545) and dof degrees of
// freedom: the Student t quantile t_{(1+p)/2}(ν) (JCGM 100 G.3.4, Table
// G.2), computed with gonum's distuv.StudentsT{Mu: 0, Sigma: 1, Nu: ν}; for
// ν = ∞ or ν > 1e7 the normal quantile. Non-integer ν is allowed (as
// Welch–Satterthwaite produces it; where JCGM 100 G.4.1 lets the user
// interpolate Table G.2 or truncate ν_eff, this evaluates t at ν_eff exactly). It does not fail: it returns NaN unless 0 < p < 1 and ν > 0.
func CoverageFactor(p, dof float64) float64 {
	if !(p > 0 && p < 1) || !(dof > 0) {
		return math.NaN()
	}
	q := (1 + p) / 2
	if dof > normalDOF {
		return distuv.UnitNormal.Quantile(q)
	}
	return distuv.StudentsT{Mu: 0, Sigma: 1, Nu: dof}.Quantile(q)
}

// Expand returns the coverage factor k = CoverageFactor(p, dof) and the
// expanded uncertainty U = k·uc (JCGM 100 §6.2), in the unit of uc. Both are
// NaN when CoverageFactor is.
func Expand(uc, dof, p float64) (k, U float64) {
	k = CoverageFactor(p, dof)
	return k, k * uc
}

// Spec is an instrument accuracy ±(OfReading·|reading| + OfRange·Range),
// OfReading and OfRange as fractions (30 ppm = 30e-6), Range in volts. Within
// the spec the error is taken as rectangular (JCGM 100 §4.3.7). The field
// names and types are those of sequencer.Accuracy, so a station's accuracy
// converts directly: uncertainty.Spec(acc).
type Spec struct {
	OfReading float64
	OfRange   float64
	Range     float64
}

// HalfWidth returns the half-width of the spec at a reading, in volts:
// OfReading·|reading| + OfRange·Range.
func (s Spec) HalfWidth(reading float64) float64 {
	return s.OfReading*math.Abs(reading) + s.OfRange*s.Range
}

// U returns the standard uncertainty of a reading under the spec taken as
// rectangular, HalfWidth(reading)/√3, in volts.
func (s Spec) U(reading float64) float64 {
	return s.HalfWidth(reading) / math.Sqrt(3)
}
