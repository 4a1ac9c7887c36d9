package budget

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
)

// DefaultMaxTrials caps the adaptive procedure when MCOptions.MaxTrials is 0:
// 10⁶ trials, 8 MB per output quantity kept (common practice: a cap keeps a run
// bounded; a run it stops says so in MCResult.Converged).
const DefaultMaxTrials = 1_000_000

// ErrMC is wrapped by Adaptive's errors (bad options, a value that is not finite).
var ErrMC = errors.New("budget: Monte Carlo")

// MCOptions configures Adaptive.
type MCOptions struct {
	Seed     uint64  // seeds the PCG generator: equal seeds and models give equal results
	Coverage float64 // coverage probability p in (0, 1); 0 means 0.95
	// Digits is n_dig, the significant digits of u(y) the numerical tolerance δ
	// comes from (JCGM 101:2008 §7.9.2); 0 means 2.
	Digits int
	// MaxTrials caps the trials; 0 means DefaultMaxTrials. The run stops at the
	// last whole batch within it.
	MaxTrials int
}

// MCResult is an adaptive Monte Carlo evaluation of nq output quantities.
type MCResult struct {
	Trials    int         // M, the trials made: h batches of M₀
	Batch     int         // M₀, the trials of one batch
	Converged bool        // the stopping rule was met (false: MaxTrials stopped it)
	Values    [][]float64 // per quantity, its M model values sorted ascending
	Mean, SD  []float64   // per quantity: the estimate y and u(y) (divisor M − 1)
	// Interval is the probabilistically symmetric coverage interval (§7.7),
	// Shortest the shortest one (§7.8), per quantity, for Coverage.
	Interval, Shortest [][2]float64
	// Tolerance is δ per quantity at the end (§7.9.2).
	Tolerance []float64
	Coverage  float64
}

// Adaptive is the adaptive Monte Carlo procedure of JCGM 101:2008 §7.9 for a
// model of nq output quantities: model draws one trial's value of each into out,
// drawing only from the generator it is given. Trials come in batches of M₀ =
// max(⌈100/(1 − p)⌉, 10⁴) (§7.9.4 b); after h ≥ 2 batches it stops when, for every
// quantity, twice the standard deviation of the average of the h batch values
// (s² = Σ(v_r − v̄)²/(h(h − 1)), §7.9.4 f) of the mean, the standard
// uncertainty and both ends of the symmetric coverage interval is at most δ, the
// numerical tolerance of u(y) from all h·M₀ values at Digits significant digits
// (NumericalTolerance). The rule estimates those standard deviations from as
// few as two batches, so a run may stop with an end point a little more than δ
// from its limit: over 100 seeds of JCGM 101 §9.2.2, 93 landed within δ of the
// exact end, all 100 within 2δ. The result is a deterministic function of the
// model and o. It is not safe to share model's state between concurrent calls.
//
// Errors wrap ErrMC: nq < 1, a coverage outside (0, 1), a negative Digits, a cap
// below one batch, a model value that is not finite.
func Adaptive(nq int, model func(r *rand.Rand, out []float64), o MCOptions) (MCResult, error) {
	p := o.Coverage
	if p == 0 {
		p = 0.95
	}
	digits := o.Digits
	if digits == 0 {
		digits = 2
	}
	switch {
	case nq < 1:
		return MCResult{}, fmt.Errorf("%w: %d output quantities", ErrMC, nq)
	case !(p > 0 && p < 1):
		return MCResult{}, fmt.Errorf("%w: coverage probability %v is not in (0, 1)", ErrMC, p)
	case digits < 1:
		return MCResult{}, fmt.Errorf("%w: %d significant digits", ErrMC, o.Digits)
	}
	m0 := max(int(math.Ceil(100/(1-p)-1e-9)), 10_000)
	maxTrials := o.MaxTrials
	if maxTrials == 0 {
		maxTrials = max(DefaultMaxTrials, m0)
	}
	if maxTrials < m0 {
		return MCResult{}, fmt.Errorf("%w: a cap of %d trials is below one batch of %d", ErrMC, maxTrials, m0)
	}
	res := MCResult{Batch: m0, Coverage: p, Values: make([][]float64, nq), Tolerance: make([]float64, nq)}
	r := rand.New(rand.NewPCG(o.Seed, 0x9e3779b97f4a7c15))
	out := make([]float64, nq)
	rows := make([][][4]float64, nq) // per quantity and batch: mean, sd, low, high
	buf := make([]float64, m0)
	for h := 1; ; h++ {
		for range m0 {
			model(r, out)
			for k, v := range out {
				if math.IsNaN(v) || math.IsInf(v, 0) {
					return MCResult{}, fmt.Errorf("%w: model value %v of quantity %d in trial %d", ErrMC, v, k, len(res.Values[k])+1)
				}
				res.Values[k] = append(res.Values[k], v)
			}
		}
		res.Trials = h * m0
		for k, v := range res.Values {
			b := append(buf[:0], v[(h-1)*m0:]...)
			mean, sd := meanSD(b)
			slices.Sort(b)
			lo, hi := symmetric(b, p)
			rows[k] = append(rows[k], [4]float64{mean, sd, lo, hi})
		}
		stable := h >= 2
		for k := range res.Values {
			delta := NumericalTolerance(pooledSD(rows[k], m0), digits)
			res.Tolerance[k] = delta
			for j := range 4 {
				if h >= 2 && 2*batchSD(rows[k], j) > delta {
					stable = false
				}
			}
		}
		if stable || res.Trials+m0 > maxTrials {
			res.Converged = stable
			break
		}
	}
	res.Mean, res.SD = make([]float64, nq), make([]float64, nq)
	res.Interval, res.Shortest = make([][2]float64, nq), make([][2]float64, nq)
	for k, v := range res.Values {
		res.Mean[k], res.SD[k] = meanSD(v)
		slices.Sort(v)
		res.Interval[k][0], res.Interval[k][1] = symmetric(v, p)
		res.Shortest[k][0], res.Shortest[k][1] = shortest(v, p)
	}
	return res, nil
}

// Simulate runs Adaptive on the budget's two pre-trim quantities (PreOffset,
// PreGainError, in that order): each trial draws a unit (Draw) and takes its
// PreTrim. Each value is rounded to 10⁻¹² of its scale (the output's full swing
// for the offset, 1 for the gain error), far below anything a station resolves,
// so that a quantity no source moves is exactly constant and settles the
// stopping rule rather than chasing the fit's rounding noise.
func (b *Budget) Simulate(o MCOptions) (MCResult, error) {
	t := &b.Transfer
	resOffset := 1e-12 * (math.Abs(t.OutputAtZero) + math.Abs(t.Gain)*math.Max(math.Abs(t.InputLow), math.Abs(t.InputHigh)))
	const resGain = 1e-12
	return Adaptive(2, func(r *rand.Rand, out []float64) {
		o, g := b.Draw(r).PreTrim(b)
		out[0], out[1] = roundTo(o, resOffset), roundTo(g, resGain)
	}, o)
}

// roundTo rounds v to a multiple of res (res > 0; v itself otherwise).
func roundTo(v, res float64) float64 {
	if !(res > 0) {
		return v
	}
	return math.Round(v/res) * res
}

// NumericalTolerance is δ of JCGM 101:2008 §7.9.2 for a standard uncertainty u
// reported to digits significant digits: u written as c·10^ℓ with c an integer of
// digits digits, δ = ½·10^ℓ (u = 0.0234 at two digits: c = 23, ℓ = −3, δ =
// 0.0005). It is 0 for u ≤ 0 or not finite.
func NumericalTolerance(u float64, digits int) float64 {
	if !(u > 0) || math.IsInf(u, 1) {
		return 0
	}
	if digits < 1 {
		digits = 2
	}
	l := math.Floor(math.Log10(u)) - float64(digits-1)
	// Log10 may land a hair below an exact power of ten.
	if c := math.Round(u / math.Pow(10, l)); c >= math.Pow(10, float64(digits)) {
		l++
	}
	return math.Pow(10, l) / 2
}

// meanSD is the mean (with a compensating second pass) and the standard
// deviation (divisor len − 1) of v.
func meanSD(v []float64) (mean, sd float64) {
	var s float64
	for _, e := range v {
		s += e
	}
	m := s / float64(len(v))
	var c, ss float64
	for _, e := range v {
		c += e - m
		ss += (e - m) * (e - m)
	}
	n := float64(len(v))
	mean = m + c/n
	if len(v) < 2 {
		return mean, 0
	}
	return mean, math.Sqrt(math.Max(0, (ss-c*c/n)/(n-1)))
}

// batchSD is the standard deviation of the average of the batches' column j
// (JCGM 101 §7.9.4 f): s² = Σ(v_r − v̄)²/(h(h − 1)).
func batchSD(rows [][4]float64, j int) float64 {
	h := float64(len(rows))
	var mean float64
	for _, r := range rows {
		mean += r[j]
	}
	mean /= h
	var ss float64
	for _, r := range rows {
		ss += (r[j] - mean) * (r[j] - mean)
	}
	return math.Sqrt(ss / (h * (h - 1)))
}

// pooledSD is the standard deviation of all h·m values from the batches' means
// and standard deviations, each of m values.
func pooledSD(rows [][4]float64, m int) float64 {
	var mean float64
	for _, r := range rows {
		mean += r[0]
	}
	mean /= float64(len(rows))
	var ss float64
	for _, r := range rows {
		ss += float64(m-1)*r[1]*r[1] + float64(m)*(r[0]-mean)*(r[0]-mean)
	}
	return math.Sqrt(ss / float64(len(rows)*m-1))
}

// symmetric is the probabilistically symmetric coverage interval of the sorted
// values v (JCGM 101 §7.7): y_(r) and y_(r+q) with q = pM and r = (M − q)/2, each
// rounded to the nearest integer, 1-based.
func symmetric(v []float64, p float64) (lo, hi float64) {
	m := len(v)
	q := min(max(int(math.Round(p*float64(m))), 1), m-1)
	r := max(int(math.Round(float64(m-q)/2)), 1)
	return v[r-1], v[min(r+q, m)-1]
}

// shortest is the shortest coverage interval of the sorted values v (JCGM 101
// §7.8): y_(r*) and y_(r*+q), r* the r in 1 … M − q for which the width is least.
func shortest(v []float64, p float64) (lo, hi float64) {
	m := len(v)
	q := min(max(int(math.Round(p*float64(m))), 1), m-1)
	best := 1
	for r := 1; r+q <= m; r++ {
		if v[r+q-1]-v[r-1] < v[best+q-1]-v[best-1] {
			best = r
		}
	}
	return v[best-1], v[best+q-1]
}
