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

import "errors"

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
// entries, and the Index of a moving-range signal is that of the later of
// the two values). IMR needs at least 2 finite values.
func IMR(xs []float64) (ind, mr Chart, err error) {
	return Chart{}, Chart{}, errors.New("spc: IMR not yet implemented")
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
// z_t lies outside its exact limits is a "ewma_beyond_limit" signal.
func EWMA(xs []float64, o EWMAOptions) (Chart, error) {
	return Chart{}, errors.New("spc: EWMA not yet implemented")
}

// CUSUM is the tabular CUSUM (e-Handbook §6.3.2.3): k, h in the data's
// units. S_hi,t = max(0, S_hi,t−1 + x_t − target − k) and
// S_lo,t = min(0, S_lo,t−1 + x_t − target + k), both starting at 0; a point
// with S_hi > h is a "cusum_high" signal, one with S_lo < −h a "cusum_low"
// signal. The sums are not reset after a signal. k ≥ 0 and h > 0 are
// required.
func CUSUM(xs []float64, target, k, h float64) (Chart, error) {
	return Chart{}, errors.New("spc: CUSUM not yet implemented")
}

// WesternElectric applies rules 1–4 to xs about center with sigma
// (e-Handbook §6.3.2): 1, one point beyond 3σ; 2, two of three consecutive
// points beyond 2σ on the same side; 3, four of five consecutive points
// beyond 1σ on the same side; 4, eight consecutive points on the same side
// of the center. A signal is reported at the point that completes the
// pattern, once per rule and point, in order of Index then rule number.
func WesternElectric(xs []float64, center, sigma float64) []Signal {
	return nil
}

// Capability of a toleranced result (e-Handbook §6.1.6).
type Capability struct {
	N                   int
	Mean                float64
	SDWithin, SDOverall float64    // MR̄/1.128 of consecutive values; sample SD (n−1)
	Cp, Cpk, Pp, Ppk    float64    // NaN where a side is missing (Cp and Pp need both)
	CpCI, CpkCI         [2]float64 // at Confidence: χ² for Cp, Bissell (1990) for Cpk; NaN where the index is
	FractionOutside     float64    // expected fraction outside the tolerance, normal model, overall SD
}

// Capable computes the capability of xs against the lower and upper
// specification limits lsl and usl (nil: no limit on that side; at least one
// is required, and lsl < usl when both are given). Cp and Cpk use SDWithin,
// Pp and Ppk SDOverall. confidence is the two-sided level of the intervals,
// 0 < confidence < 1; 0 means 0.95. Capable needs at least 2 finite values.
func Capable(xs []float64, lsl, usl *float64, confidence float64) (Capability, error) {
	return Capability{}, errors.New("spc: Capable not yet implemented")
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
// last bin also holds x = hi. NaN values are counted nowhere. n < 1 or
// hi ≤ lo gives a Histogram with no bins that counts every value below or
// above the midpoint as Under or Over.
func Bin(xs []float64, lo, hi float64, n int) Histogram {
	return Histogram{Lo: lo, Hi: hi}
}
