// Package spc is the control-chart and process-capability core: the
// individuals and moving-range charts (I-MR) with the Western Electric run
// rules, the EWMA chart, the tabular CUSUM, capability indices Cp, Cpk, Pp,
// Ppk with confidence intervals, and a histogram with explicit under- and
// overflow counts. Formulas follow the NIST/SEMATECH e-Handbook of
// Statistical Methods, chapter 6 (§6.1.6 capability, §6.3.2 control charts).
//
// Every number is in the units of the data it was computed from, except the
// indices (Cp, Cpk, Pp, Ppk), which are pure numbers, and FractionOutside,
// a fraction 0–1. Indices of points and signals are 1-based.
//
// All functions are pure: they do not retain or modify their arguments and
// share no state, so they are safe for concurrent use.
package spc

import (
	"errors"
	"fmt"
	"math"
	"slices"

	"gonum.org/v1/gonum/stat/distuv"
)

// ErrTooFewPoints is wrapped by the errors of IMR, EWMA, CUSUM and Capable
// when the series is shorter than the function needs.
var ErrTooFewPoints = errors.New("too few points")

// ErrInvalidInput is wrapped by the errors of every function here for a NaN
// or ±Inf value or an option outside its range.
var ErrInvalidInput = errors.New("invalid input")

// Control-chart constants for moving ranges of two consecutive values
// (e-Handbook §6.3.2.2 and the constants table of §6.3.2).
const (
	D2 = 1.128 // d2 for n = 2: MR̄/d2 estimates sigma
	D4 = 3.267 // D4 for n = 2: UCL of the moving-range chart is D4·MR̄
)

// Names of the chart kinds in Chart.Kind.
const (
	KindIndividuals = "individuals"
	KindMovingRange = "moving_range"
	KindEWMA        = "ewma"
	KindCUSUM       = "cusum"
	KindMeans       = "means"   // X̄ chart of subgroup means (Subgroups)
	KindSpreads     = "spreads" // s chart of subgroup standard deviations (Subgroups)
)

// Names of the signal rules in Signal.Rule.
const (
	RuleBeyond3Sigma = "beyond_3_sigma"        // Western Electric rule 1
	Rule2of3Beyond2  = "2_of_3_beyond_2_sigma" // Western Electric rule 2
	Rule4of5Beyond1  = "4_of_5_beyond_1_sigma" // Western Electric rule 3
	Rule8OnOneSide   = "8_on_one_side"         // Western Electric rule 4
	RuleEWMABeyond   = "ewma_beyond_limit"
	RuleCUSUMHigh    = "cusum_high"
	RuleCUSUMLow     = "cusum_low"
)

// Point is one observation on a chart.
type Point struct {
	Value     float64 // the observation (moving-range chart: the moving range)
	Statistic float64 // what is plotted: the value (I, MR), z_t (EWMA), S_hi (CUSUM)
	Lower     float64 // CUSUM only: S_lo, zero or negative (0 elsewhere)
	UCL, LCL  float64 // this point's limits (EWMA: the exact limits at this point; CUSUM: h and −h)
}

// Signal is one out-of-control signal: 1-based Index of the point, Rule names
// it: "beyond_3_sigma", "2_of_3_beyond_2_sigma", "4_of_5_beyond_1_sigma",
// "8_on_one_side" (Western Electric rules 1–4, e-Handbook §6.3.2),
// "ewma_beyond_limit", "cusum_high", "cusum_low".
type Signal struct {
	Index int
	Rule  string
}

// Chart is a control chart of a series.
type Chart struct {
	Kind             string  // "individuals", "moving_range", "ewma", "cusum"
	Center, UCL, LCL float64 // steady-state limits (CUSUM: 0, h, −h in data units)
	Sigma            float64 // the sigma the limits use
	Points           []Point
	Signals          []Signal
}

// IMR returns the individuals chart (x̄ ± 3·MR̄/d2, d2 = 1.128, with Western
// Electric rules 1–4 as signals) and the moving-range chart (MR̄, UCL = D4·MR̄,
// D4 = 3.267, LCL 0; its first point has no moving range: Points has n−1
// entries). A moving range above its UCL is a "beyond_3_sigma" signal whose
// Index is that of the later of its two values in xs, so the moving range
// is mr.Points[Index−2]. Both charts' Sigma is
// MR̄/d2. A series whose values are all equal has Sigma 0 and no signals.
// IMR needs at least 2 finite values.
func IMR(xs []float64) (ind, mr Chart, err error) {
	if err := checkSeries("IMR", xs, 2); err != nil {
		return Chart{}, Chart{}, err
	}
	center := mean(xs)
	mrBar := meanMovingRange(xs)
	sigma := mrBar / D2
	ind = Chart{
		Kind:   KindIndividuals,
		Center: center,
		UCL:    center + 3*sigma,
		LCL:    center - 3*sigma,
		Sigma:  sigma,
		Points: make([]Point, len(xs)),
	}
	for i, x := range xs {
		ind.Points[i] = Point{Value: x, Statistic: x, UCL: ind.UCL, LCL: ind.LCL}
	}
	ind.Signals = WesternElectric(xs, center, sigma)

	mr = Chart{
		Kind:   KindMovingRange,
		Center: mrBar,
		UCL:    D4 * mrBar,
		LCL:    0,
		Sigma:  sigma,
		Points: make([]Point, len(xs)-1),
	}
	for i := 1; i < len(xs); i++ {
		r := math.Abs(xs[i] - xs[i-1])
		mr.Points[i-1] = Point{Value: r, Statistic: r, UCL: mr.UCL, LCL: 0}
		if r > mr.UCL {
			mr.Signals = append(mr.Signals, Signal{Index: i + 1, Rule: RuleBeyond3Sigma})
		}
	}
	return ind, mr, nil
}

// EWMAOptions configures EWMA.
type EWMAOptions struct {
	Lambda float64  // weight of the newest value, 0 < λ ≤ 1, required
	Width  float64  // L, the limits' width in sigmas of z; 0 means 3
	Target *float64 // the center line; nil means the mean of the data
	Sigma  *float64 // the process sigma; nil means MR̄/1.128
}

// EWMA returns the exponentially weighted moving average chart
// (e-Handbook §6.3.2.4): z_0 = target, z_t = λ·x_t + (1−λ)·z_{t−1}, with the
// exact limits target ± L·σ·√(λ/(2−λ)·(1−(1−λ)^{2t})) on each point and the
// steady-state limits target ± L·σ·√(λ/(2−λ)) in the Chart. A point whose
// z_t lies outside its exact limits is a "ewma_beyond_limit" signal. EWMA
// needs at least 2 finite values when it estimates sigma (MR̄/1.128, which
// must not be zero), 1 when Sigma is given.
func EWMA(xs []float64, o EWMAOptions) (Chart, error) {
	need := 2
	if o.Sigma != nil {
		need = 1
	}
	if err := checkSeries("EWMA", xs, need); err != nil {
		return Chart{}, err
	}
	lambda := o.Lambda
	if !(lambda > 0 && lambda <= 1) {
		return Chart{}, fmt.Errorf("spc: EWMA: lambda %v: %w: want 0 < lambda <= 1", lambda, ErrInvalidInput)
	}
	width := o.Width
	if width == 0 {
		width = 3
	}
	if !(width > 0) || math.IsInf(width, 0) {
		return Chart{}, fmt.Errorf("spc: EWMA: width %v: %w: want a finite width > 0", width, ErrInvalidInput)
	}
	var target float64
	if o.Target != nil {
		target = *o.Target
		if math.IsNaN(target) || math.IsInf(target, 0) {
			return Chart{}, fmt.Errorf("spc: EWMA: target %v: %w: want a finite number", target, ErrInvalidInput)
		}
	} else {
		target = mean(xs)
	}
	var sigma float64
	if o.Sigma != nil {
		sigma = *o.Sigma
		if !(sigma > 0) || math.IsInf(sigma, 0) {
			return Chart{}, fmt.Errorf("spc: EWMA: sigma %v: %w: want a finite sigma > 0", sigma, ErrInvalidInput)
		}
	} else {
		sigma = meanMovingRange(xs) / D2
		if sigma == 0 {
			return Chart{}, fmt.Errorf("spc: EWMA: every moving range is zero, so the data give no sigma: %w: give Sigma", ErrInvalidInput)
		}
	}
	steady := width * sigma * math.Sqrt(lambda/(2-lambda))
	c := Chart{
		Kind:   KindEWMA,
		Center: target,
		UCL:    target + steady,
		LCL:    target - steady,
		Sigma:  sigma,
		Points: make([]Point, len(xs)),
	}
	z := target
	for i, x := range xs {
		t := float64(i + 1)
		z = lambda*x + (1-lambda)*z
		half := width * sigma * math.Sqrt(lambda/(2-lambda)*(1-math.Pow(1-lambda, 2*t)))
		p := Point{Value: x, Statistic: z, UCL: target + half, LCL: target - half}
		c.Points[i] = p
		if z > p.UCL || z < p.LCL {
			c.Signals = append(c.Signals, Signal{Index: i + 1, Rule: RuleEWMABeyond})
		}
	}
	return c, nil
}

// CUSUM is the tabular CUSUM (e-Handbook §6.3.2.3): k, h in the data's
// units. S_hi,t = max(0, S_hi,t−1 + x_t − target − k) and
// S_lo,t = min(0, S_lo,t−1 + x_t − target + k), both starting at 0; a point
// with S_hi > h is a "cusum_high" signal, one with S_lo < −h a "cusum_low"
// signal. S_lo is the negative of the e-Handbook's S_lo = max(0, …), so
// that both sums plot against the limits h and −h. The sums are not reset
// after a signal, so every point beyond a limit is a signal. Chart.Sigma is
// 0: the limits come from h, not from a sigma. k ≥ 0 and h > 0 are
// required, and at least one value.
func CUSUM(xs []float64, target, k, h float64) (Chart, error) {
	if err := checkSeries("CUSUM", xs, 1); err != nil {
		return Chart{}, err
	}
	if math.IsNaN(target) || math.IsInf(target, 0) {
		return Chart{}, fmt.Errorf("spc: CUSUM: target %v: %w: want a finite number", target, ErrInvalidInput)
	}
	if !(k >= 0) || math.IsInf(k, 0) {
		return Chart{}, fmt.Errorf("spc: CUSUM: k %v: %w: want a finite k >= 0", k, ErrInvalidInput)
	}
	if !(h > 0) || math.IsInf(h, 0) {
		return Chart{}, fmt.Errorf("spc: CUSUM: h %v: %w: want a finite h > 0", h, ErrInvalidInput)
	}
	c := Chart{
		Kind:   KindCUSUM,
		Center: 0,
		UCL:    h,
		LCL:    -h,
		Points: make([]Point, len(xs)),
	}
	var hi, lo float64
	for i, x := range xs {
		hi = math.Max(0, hi+x-target-k)
		lo = math.Min(0, lo+x-target+k)
		c.Points[i] = Point{Value: x, Statistic: hi, Lower: lo, UCL: h, LCL: -h}
		if hi > h {
			c.Signals = append(c.Signals, Signal{Index: i + 1, Rule: RuleCUSUMHigh})
		}
		if lo < -h {
			c.Signals = append(c.Signals, Signal{Index: i + 1, Rule: RuleCUSUMLow})
		}
	}
	return c, nil
}

// WesternElectric applies rules 1–4 to xs about center with sigma
// (e-Handbook §6.3.2): 1, one point beyond 3σ; 2, two of three consecutive
// points beyond 2σ on the same side; 3, four of five consecutive points
// beyond 1σ on the same side; 4, eight consecutive points on the same side
// of the center. "Beyond" is strictly beyond; a point on the center line is
// on neither side. A signal is reported at a point that lies beyond the
// rule's line itself and completes the pattern (at the start of the series
// the first points count as a shorter window, so two points beyond 2σ
// signal at the second: a choice of this package, as is "strictly"), once
// per rule and point, in order of Index then rule number. Every point of a
// longer run signals rule 4 again. A sigma that is not finite and > 0 gives
// no signals.
func WesternElectric(xs []float64, center, sigma float64) []Signal {
	if !(sigma > 0) || math.IsInf(sigma, 0) || math.IsNaN(center) || math.IsInf(center, 0) {
		return nil
	}
	// side(i, m) is +1 when xs[i] lies more than m sigmas above the
	// center, −1 when more than m sigmas below, 0 otherwise.
	side := func(i int, m float64) int {
		d := xs[i] - center
		switch {
		case d > m*sigma:
			return 1
		case d < -m*sigma:
			return -1
		}
		return 0
	}
	// completes reports whether point i lies beyond m sigmas and, with it,
	// at least need of the last window points (fewer at the start of the
	// series) lie beyond m sigmas on its side.
	completes := func(i, window, need int, m float64) bool {
		s := side(i, m)
		if s == 0 {
			return false
		}
		n := 0
		for j := max(0, i-window+1); j <= i; j++ {
			if side(j, m) == s {
				n++
			}
		}
		return n >= need
	}
	var out []Signal
	for i := range xs {
		if math.IsNaN(xs[i]) {
			continue
		}
		if side(i, 3) != 0 {
			out = append(out, Signal{Index: i + 1, Rule: RuleBeyond3Sigma})
		}
		if completes(i, 3, 2, 2) {
			out = append(out, Signal{Index: i + 1, Rule: Rule2of3Beyond2})
		}
		if completes(i, 5, 4, 1) {
			out = append(out, Signal{Index: i + 1, Rule: Rule4of5Beyond1})
		}
		if completes(i, 8, 8, 0) {
			out = append(out, Signal{Index: i + 1, Rule: Rule8OnOneSide})
		}
	}
	return out
}

// Capability of a toleranced result (e-Handbook §6.1.6).
type Capability struct {
	N                   int
	Mean                float64
	SDWithin, SDOverall float64    // MR̄/1.128 of consecutive values; sample SD (n−1)
	Cp, Cpk, Pp, Ppk    float64    // NaN where a side is missing (Cp and Pp need both)
	CpCI, CpkCI         [2]float64 // [low, high] at the confidence asked for: χ² for Cp, Bissell (1990) for Cpk; NaN where the index is
	FractionOutside     float64    // expected fraction outside the tolerance, normal model, overall SD
}

// Capable computes the capability of xs against the lower and upper
// specification limits lsl and usl (nil: no limit on that side; at least one
// is required, and lsl < usl when both are given). Cp and Cpk use SDWithin,
// Pp and Ppk SDOverall. confidence is the two-sided level of the intervals,
// 0 < confidence < 1; 0 means 0.95. The Cp interval is
// Ĉp·√(χ²_{α/2,ν}/ν) … Ĉp·√(χ²_{1−α/2,ν}/ν) with ν = n − 1, exact for a
// sample SD of normal data and an approximation for SDWithin; the Cpk
// interval is Bissell's normal approximation
// Ĉpk·[1 ± z_{1−α/2}·√(1/(9n·Ĉpk²) + 1/(2(n−1)))]. When a standard deviation
// is zero (all values equal) the indices built on it are ±Inf or NaN.
// Capable needs at least 2 finite values.
func Capable(xs []float64, lsl, usl *float64, confidence float64) (Capability, error) {
	if err := checkSeries("capability", xs, 2); err != nil {
		return Capability{}, err
	}
	if lsl == nil && usl == nil {
		return Capability{}, fmt.Errorf("spc: capability: %w: want a lower or an upper specification limit, or both", ErrInvalidInput)
	}
	for _, l := range []*float64{lsl, usl} {
		if l != nil && (math.IsNaN(*l) || math.IsInf(*l, 0)) {
			return Capability{}, fmt.Errorf("spc: capability: specification limit %v: %w: want a finite number", *l, ErrInvalidInput)
		}
	}
	if lsl != nil && usl != nil && !(*lsl < *usl) {
		return Capability{}, fmt.Errorf("spc: capability: limits %v and %v: %w: want the lower limit below the upper", *lsl, *usl, ErrInvalidInput)
	}
	if confidence == 0 {
		confidence = 0.95
	}
	if !(confidence > 0 && confidence < 1) {
		return Capability{}, fmt.Errorf("spc: capability: confidence %v: %w: want 0 < confidence < 1", confidence, ErrInvalidInput)
	}
	n := len(xs)
	m := mean(xs)
	var ss float64
	for _, x := range xs {
		ss += (x - m) * (x - m)
	}
	c := Capability{
		N:         n,
		Mean:      m,
		SDWithin:  meanMovingRange(xs) / D2,
		SDOverall: math.Sqrt(ss / float64(n-1)),
	}
	c.Cp, c.Cpk = indices(m, c.SDWithin, lsl, usl)
	c.Pp, c.Ppk = indices(m, c.SDOverall, lsl, usl)

	alpha := 1 - confidence
	nu := float64(n - 1)
	chi := distuv.ChiSquared{K: nu}
	c.CpCI = [2]float64{
		c.Cp * math.Sqrt(chi.Quantile(alpha/2)/nu),
		c.Cp * math.Sqrt(chi.Quantile(1-alpha/2)/nu),
	}
	z := distuv.UnitNormal.Quantile(1 - alpha/2)
	half := z * math.Sqrt(1/(9*float64(n)*c.Cpk*c.Cpk)+1/(2*nu))
	c.CpkCI = [2]float64{c.Cpk * (1 - half), c.Cpk * (1 + half)}
	if c.CpkCI[0] > c.CpkCI[1] { // Ĉpk < 0: the mean is outside the tolerance
		c.CpkCI[0], c.CpkCI[1] = c.CpkCI[1], c.CpkCI[0]
	}

	if lsl != nil {
		c.FractionOutside += distuv.UnitNormal.CDF((*lsl - m) / c.SDOverall)
	}
	if usl != nil {
		c.FractionOutside += distuv.UnitNormal.Survival((*usl - m) / c.SDOverall)
	}
	return c, nil
}

// indices returns (USL−LSL)/(6σ) and min(USL−μ, μ−LSL)/(3σ), the first NaN
// unless both limits are given, the second from the side(s) given
// (e-Handbook §6.1.6).
func indices(mu, sigma float64, lsl, usl *float64) (p, pk float64) {
	p, pk = math.NaN(), math.Inf(1)
	if lsl != nil && usl != nil {
		p = (*usl - *lsl) / (6 * sigma)
	}
	if lsl != nil {
		pk = math.Min(pk, (mu-*lsl)/(3*sigma))
	}
	if usl != nil {
		pk = math.Min(pk, (*usl-mu)/(3*sigma))
	}
	return p, pk
}

// Histogram is xs binned over [Lo, Hi] in len(Counts) equal bins, with
// explicit under- and overflow counts, so outliers never flatten it.
type Histogram struct {
	Lo, Hi      float64
	Counts      []int
	Under, Over int // values below Lo; values above Hi
}

// Bin bins xs over [lo, hi] (the tolerance band plus a margin) in n equal
// bins; bin i holds lo + i·w ≤ x < lo + (i+1)·w with w = (hi−lo)/n, and the
// last bin also holds x = hi. NaN values are counted nowhere; every other
// value is counted once. n < 1, or lo and hi not finite with lo < hi, gives
// a Histogram with no bins that counts a value below the midpoint of lo and
// hi as Under and any other as Over.
func Bin(xs []float64, lo, hi float64, n int) Histogram {
	h := Histogram{Lo: lo, Hi: hi}
	if n < 1 || !(hi > lo) || math.IsInf(hi-lo, 0) {
		mid := lo + (hi-lo)/2
		for _, x := range xs {
			switch {
			case math.IsNaN(x):
			case x < mid:
				h.Under++
			default:
				h.Over++
			}
		}
		return h
	}
	h.Counts = make([]int, n)
	w := (hi - lo) / float64(n)
	for _, x := range xs {
		switch {
		case math.IsNaN(x):
		case x < lo:
			h.Under++
		case x > hi:
			h.Over++
		default:
			i := int((x - lo) / w)
			if i >= n {
				i = n - 1 // x = hi, or rounding just below it
			}
			h.Counts[i]++
		}
	}
	return h
}

// C4 is the bias correction of the sample standard deviation of n normal
// values, E[s] = c4·σ: c4(n) = √(2/(n−1))·Γ(n/2)/Γ((n−1)/2) (e-Handbook
// §6.3.2.1); NaN for n < 2.
func C4(n int) float64 {
	if n < 2 {
		return math.NaN()
	}
	a, _ := math.Lgamma(float64(n) / 2)
	b, _ := math.Lgamma(float64(n-1) / 2)
	return math.Sqrt(2/float64(n-1)) * math.Exp(a-b)
}

// Subgroups returns the X̄ chart (Kind "means") and the s chart (Kind
// "spreads") of groups of unequal size, with a given center and process
// sigma (e-Handbook §6.3.2.1, limits from a known sigma): group i's mean is
// plotted against center ± 3·sigma/√nᵢ, its sample standard deviation sᵢ
// against sigma·(c4(nᵢ) ± 3·√(1 − c4(nᵢ)²)), the lower limit no less than
// 0. A group of one value has no standard deviation: its s point has Value,
// Statistic and limits NaN. Each chart's steady-state Center, UCL and LCL are
// those of the median group size (the s chart's Center is sigma·c4). A point
// beyond its own limits is a "beyond_3_sigma" signal. Both charts' Sigma is
// sigma. Subgroups needs at least one group, every group at least one
// finite value, a finite center and a finite sigma > 0.
func Subgroups(groups [][]float64, center, sigma float64) (means, spreads Chart, err error) {
	if len(groups) == 0 {
		return Chart{}, Chart{}, fmt.Errorf("spc: subgroups: no groups: %w: want at least 1", ErrTooFewPoints)
	}
	if math.IsNaN(center) || math.IsInf(center, 0) || !(sigma > 0) || math.IsInf(sigma, 0) {
		return Chart{}, Chart{}, fmt.Errorf("spc: subgroups: center %v, sigma %v: %w: want a finite center and a finite sigma > 0", center, sigma, ErrInvalidInput)
	}
	sizes := make([]int, len(groups))
	for i, g := range groups {
		if err := checkSeries(fmt.Sprintf("subgroups: group %d", i+1), g, 1); err != nil {
			return Chart{}, Chart{}, err
		}
		sizes[i] = len(g)
	}
	meanLimits := func(n int) (lo, hi float64) {
		w := 3 * sigma / math.Sqrt(float64(n))
		return center - w, center + w
	}
	sdLimits := func(n int) (c, lo, hi float64) {
		if n < 2 {
			return math.NaN(), math.NaN(), math.NaN()
		}
		c4 := C4(n)
		w := 3 * math.Sqrt(1-c4*c4)
		return sigma * c4, math.Max(0, sigma*(c4-w)), sigma * (c4 + w)
	}
	med := medianInt(sizes)
	means = Chart{Kind: KindMeans, Center: center, Sigma: sigma, Points: make([]Point, len(groups))}
	means.LCL, means.UCL = meanLimits(med)
	spreads = Chart{Kind: KindSpreads, Sigma: sigma, Points: make([]Point, len(groups))}
	spreads.Center, spreads.LCL, spreads.UCL = sdLimits(max(med, 2))
	for i, g := range groups {
		m := mean(g)
		lo, hi := meanLimits(len(g))
		means.Points[i] = Point{Value: m, Statistic: m, UCL: hi, LCL: lo}
		if m > hi || m < lo {
			means.Signals = append(means.Signals, Signal{Index: i + 1, Rule: RuleBeyond3Sigma})
		}
		s := math.NaN()
		if len(g) >= 2 {
			var ss float64
			for _, x := range g {
				ss += (x - m) * (x - m)
			}
			s = math.Sqrt(ss / float64(len(g)-1))
		}
		_, slo, shi := sdLimits(len(g))
		spreads.Points[i] = Point{Value: s, Statistic: s, UCL: shi, LCL: slo}
		if s > shi || s < slo {
			spreads.Signals = append(spreads.Signals, Signal{Index: i + 1, Rule: RuleBeyond3Sigma})
		}
	}
	return means, spreads, nil
}

// medianInt is the median of ns (the lower middle one of an even count).
func medianInt(ns []int) int {
	s := slices.Clone(ns)
	slices.Sort(s)
	return s[(len(s)-1)/2]
}

// checkSeries returns an error unless xs holds at least need values, all
// finite.
func checkSeries(what string, xs []float64, need int) error {
	if len(xs) < need {
		return fmt.Errorf("spc: %s: %d values: %w: want at least %d", what, len(xs), ErrTooFewPoints, need)
	}
	for i, x := range xs {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return fmt.Errorf("spc: %s: value %d is %v: %w: want finite numbers", what, i+1, x, ErrInvalidInput)
		}
	}
	return nil
}

func mean(xs []float64) float64 {
	var s float64
	for _, x := range xs {
		s += x
	}
	return s / float64(len(xs))
}

// meanMovingRange returns MR̄, the mean of |x_i − x_{i−1}| over the
// len(xs)−1 consecutive pairs; len(xs) ≥ 2.
func meanMovingRange(xs []float64) float64 {
	var s float64
	for i := 1; i < len(xs); i++ {
		s += math.Abs(xs[i] - xs[i-1])
	}
	return s / float64(len(xs)-1)
}
