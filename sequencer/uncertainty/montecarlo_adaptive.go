package uncertainty

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
)

// Coverage interval kinds of a Monte Carlo result (JCGM 101:2008 §7.7, §7.8).
const (
	// IntervalSymmetric is the probabilistically symmetric interval: the
	// probability (1 − p)/2 lies on each side (JCGM 101 §7.7).
	IntervalSymmetric = "symmetric"
	// IntervalShortest is the shortest interval holding probability p
	// (JCGM 101 §7.8); for a symmetric output it is the symmetric one.
	IntervalShortest = "shortest"
)

// DefaultMaxTrials caps the trials of the adaptive procedure when
// MCOptions.MaxTrials is 0: 2·10⁶, about 3 s for a line fit of 11 points
// on one core, and 16 MB per output kept (common practice: a cap keeps a
// run's time bounded; a result it stops says so in MCRun.Converged).
const DefaultMaxTrials = 2_000_000

// MCOptions configures a Monte Carlo evaluation (JCGM 101:2008).
type MCOptions struct {
	// P is the coverage probability, in (0, 1).
	P float64
	// Interval is IntervalSymmetric ("" means it) or IntervalShortest.
	Interval string
	// Trials, when > 0, is a fixed number of trials M (no adaptive
	// procedure). 0 selects the adaptive procedure of JCGM 101 §7.9.
	Trials int
	// MaxTrials caps the total trials of the adaptive procedure;
	// 0 means DefaultMaxTrials.
	MaxTrials int
	// Digits is n_dig, the significant digits of u(y) the numerical
	// tolerance is taken from (JCGM 101 §7.9.2); 0 means 2.
	Digits int
	// Seed seeds the PCG generator; equal options and models give equal
	// results.
	Seed uint64
}

// MCRun is a Monte Carlo evaluation with its model values kept: Values[k][t]
// is output k of trial t, in trial order, so that any linear combination of
// the outputs has its own coverage interval (Linear).
type MCRun struct {
	Values [][]float64
	// Trials is M, the trials made (h·M₀ for the adaptive procedure).
	Trials int
	// Adaptive is true for the procedure of JCGM 101 §7.9, false for a
	// fixed number of trials.
	Adaptive bool
	// Converged is true when the adaptive procedure stabilised (every
	// output's 2·s of y, u(y), y_low and y_high ≤ δ); false when MaxTrials
	// stopped it first, and false for a fixed number of trials (not tested).
	Converged bool
	// Tolerance is δ of each output at the end, from its u(y) and Digits
	// (JCGM 101 §7.9.2).
	Tolerance []float64
	P         float64
	Interval  string
	Digits    int
}

// MCSummary is the Monte Carlo result for one output quantity: the mean of
// the model values (JCGM 101 §7.6 estimate), their standard deviation
// (divisor M − 1) and the coverage interval [Low, High] of the run's kind
// and probability.
type MCSummary struct {
	Mean, Std, Low, High float64
}

// NumericalTolerance is δ of JCGM 101:2008 §7.9.2 for a standard uncertainty
// u reported to digits significant digits: write u as c·10^l with c an
// integer of digits digits; δ = 10^l/2. (u = 0.0234 with 2 digits: c = 23, l
// = −3, δ = 0.0005.) It is 0 for u ≤ 0 or not finite.
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

// MonteCarloModel propagates distributions through a model with outputs
// outputs (JCGM 101:2008 §7): each trial calls model with the run's random
// generator and a slice of outputs values to fill. With opt.Trials > 0 it
// makes that many trials; with opt.Trials = 0 it follows the adaptive
// procedure of §7.9.4: sequences of M₀ = max(⌈100/(1 − p)⌉, 10⁴) trials
// each (§7.9.4 b), and after h ≥ 2 sequences it stops when, for every
// output, twice the standard deviation of the h sequence values of y,
// u(y), y_low and y_high (each s² = Σ(v_r − v̄)²/(h(h − 1)), §7.9.4 f) is
// at most δ = NumericalTolerance(u(y) of all h·M₀ values, opt.Digits), or
// when the next sequence would pass opt.MaxTrials (Converged = false).
//
// The result is a deterministic function of the model and opt; the model
// must draw only from the generator it is given. There is no shared state.
//
// Errors (wrapping ErrInvalidInput): outputs < 1, P outside (0, 1), an
// unknown Interval, 0 < Trials < MinTrials, a MaxTrials below M₀, or a
// model value that is not finite.
func MonteCarloModel(outputs int, model func(rng *rand.Rand, y []float64), opt MCOptions) (*MCRun, error) {
	const fn = "uncertainty.MonteCarloModel"
	if outputs < 1 {
		return nil, fmt.Errorf("%s: %w: %d outputs", fn, ErrInvalidInput, outputs)
	}
	if err := opt.check(fn); err != nil {
		return nil, err
	}
	m0 := max(int(math.Ceil(100/(1-opt.P)-1e-9)), 10_000)
	maxTrials := opt.MaxTrials
	if maxTrials == 0 {
		maxTrials = max(DefaultMaxTrials, m0)
	}
	if opt.Trials == 0 && maxTrials < m0 {
		return nil, fmt.Errorf("%s: %w: a cap of %d trials is below one sequence of %d", fn, ErrInvalidInput, maxTrials, m0)
	}
	run := &MCRun{Values: make([][]float64, outputs), P: opt.P, Interval: opt.interval(), Digits: opt.digits(), Tolerance: make([]float64, outputs)}
	rng := rand.New(rand.NewPCG(opt.Seed, 0x5851f42d4c957f2d))
	y := make([]float64, outputs)
	draw := func(m int) error {
		for range m {
			model(rng, y)
			for k, v := range y {
				if math.IsNaN(v) || math.IsInf(v, 0) {
					return fmt.Errorf("%s: %w: model value %v in trial %d", fn, ErrInvalidInput, v, len(run.Values[0])+1)
				}
				run.Values[k] = append(run.Values[k], v)
			}
		}
		return nil
	}
	if opt.Trials > 0 {
		for k := range run.Values {
			run.Values[k] = make([]float64, 0, opt.Trials)
		}
		if err := draw(opt.Trials); err != nil {
			return nil, err
		}
		run.Trials = opt.Trials
		for k := range run.Values {
			run.Tolerance[k] = NumericalTolerance(stdOf(run.Values[k]), run.Digits)
		}
		return run, nil
	}
	run.Adaptive = true
	// seq[k] holds, per sequence, (y, u(y), y_low, y_high) of output k.
	seq := make([][][4]float64, outputs)
	buf := make([]float64, m0)
	for h := 1; ; h++ {
		if err := draw(m0); err != nil {
			return nil, err
		}
		run.Trials = h * m0
		for k, v := range run.Values {
			s := summarise(append(buf[:0], v[(h-1)*m0:]...), run.P, run.Interval)
			seq[k] = append(seq[k], [4]float64{s.Mean, s.Std, s.Low, s.High})
		}
		stable := h >= 2
		for k := range run.Values {
			delta := NumericalTolerance(pooledStd(seq[k], m0), run.Digits)
			run.Tolerance[k] = delta
			for j := range 4 {
				if h >= 2 && 2*seqStd(seq[k], j) > delta {
					stable = false
				}
			}
		}
		if stable {
			run.Converged = true
			return run, nil
		}
		if run.Trials+m0 > maxTrials {
			return run, nil
		}
	}
}

func (o MCOptions) interval() string {
	if o.Interval == "" {
		return IntervalSymmetric
	}
	return o.Interval
}

func (o MCOptions) digits() int {
	if o.Digits < 1 {
		return 2
	}
	return o.Digits
}

func (o MCOptions) check(fn string) error {
	switch {
	case !(o.P > 0 && o.P < 1):
		return fmt.Errorf("%s: %w: coverage probability %v is not in (0, 1)", fn, ErrInvalidInput, o.P)
	case o.Interval != "" && o.Interval != IntervalSymmetric && o.Interval != IntervalShortest:
		return fmt.Errorf("%s: %w: interval %q (expected %s or %s)", fn, ErrInvalidInput, o.Interval, IntervalSymmetric, IntervalShortest)
	case o.Trials < 0 || o.Trials > 0 && o.Trials < MinTrials:
		return fmt.Errorf("%s: %w: %d trials; at least %d are needed", fn, ErrInvalidInput, o.Trials, MinTrials)
	case o.MaxTrials < 0:
		return fmt.Errorf("%s: %w: a cap of %d trials", fn, ErrInvalidInput, o.MaxTrials)
	}
	return nil
}

// seqStd is the standard deviation of the average of the h sequence values
// column j (JCGM 101 §7.9.4 f): s² = Σ(v_r − v̄)²/(h(h − 1)).
func seqStd(rows [][4]float64, j int) float64 {
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

// pooledStd is the standard deviation of all h·m values from the h sequences'
// means and standard deviations (rows[r][0], rows[r][1]), each of m values:
// Σ(v − v̄)² = Σ_r ((m − 1)·s_r² + m·(ȳ_r − ȳ)²), divisor h·m − 1.
func pooledStd(rows [][4]float64, m int) float64 {
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

// Summary is the result for output k (mean, standard deviation, coverage
// interval of the run's kind and probability) from all the run's trials.
func (r *MCRun) Summary(k int) MCSummary {
	return summarise(slices.Clone(r.Values[k]), r.P, r.Interval)
}

// Linear is the result for the linear combination q = c + Σ g[k]·y_k of the
// outputs, evaluated trial by trial (so that correlations between the outputs
// count, JCGM 101 §7.6), with the run's interval kind and probability. g must
// have one coefficient per output.
func (r *MCRun) Linear(g []float64, c float64) MCSummary {
	q := make([]float64, r.Trials)
	for t := range q {
		v := c
		for k, gk := range g {
			v += gk * r.Values[k][t]
		}
		q[t] = v
	}
	return summarise(q, r.P, r.Interval)
}

// Cov is the sample covariance (divisor M − 1) of outputs j and k.
func (r *MCRun) Cov(j, k int) float64 {
	a, b := r.Values[j], r.Values[k]
	ma, mb := meanOf(a), meanOf(b)
	var c float64
	for t := range a {
		c += (a[t] - ma) * (b[t] - mb)
	}
	return c / float64(len(a)-1)
}

// summarise computes an MCSummary of v, sorting v in place.
func summarise(v []float64, p float64, kind string) MCSummary {
	s := MCSummary{Mean: meanOf(v), Std: stdOf(v)}
	slices.Sort(v)
	s.Low, s.High = coverageInterval(v, p, kind)
	return s
}

// coverageInterval is the coverage interval for probability p of the sorted
// model values v (JCGM 101 §7.1.2: q = pM, rounded to the nearest integer
// when pM is not one). Symmetric (§7.7): y_low = y_(r), y_high = y_(r+q) with
// r = (M − q)/2 rounded likewise. Shortest (§7.8): the r* in 1 … M − q for
// which y_(r+q) − y_(r) is least. y_(r) is the r-th smallest, 1-based.
func coverageInterval(v []float64, p float64, kind string) (lo, hi float64) {
	m := len(v)
	q := int(nearestInt(p * float64(m)))
	q = min(max(q, 1), m-1)
	if kind == IntervalShortest {
		best := 1
		for r := 1; r+q <= m; r++ {
			if v[r+q-1]-v[r-1] < v[best+q-1]-v[best-1] {
				best = r
			}
		}
		return v[best-1], v[best+q-1]
	}
	i, j := SymmetricRanks(m, p)
	return v[i], v[j]
}

// SymmetricRanks are the 0-based ranks, among m sorted model values, of the
// ends of the probabilistically symmetric coverage interval for probability p
// (JCGM 101 §7.7): y_(r) and y_(r+q) with q = pM and r = (M − q)/2, each
// rounded to the nearest integer, 1-based as the clause counts them. A caller
// that needs only the two ends may select them rather than sort every value.
func SymmetricRanks(m int, p float64) (lo, hi int) {
	q := int(nearestInt(p * float64(m)))
	q = min(max(q, 1), m-1)
	r := max(int(nearestInt(float64(m-q)/2)), 1)
	return r - 1, min(r+q, m) - 1
}

// MeanStd are the mean (with a compensating second pass) and the sample
// standard deviation (divisor len(v) − 1) of model values v.
func MeanStd(v []float64) (mean, std float64) {
	return meanOf(v), stdOf(v)
}

// meanOf is the mean of v with a compensating second pass.
func meanOf(v []float64) float64 {
	var s float64
	for _, e := range v {
		s += e
	}
	m := s / float64(len(v))
	var c float64
	for _, e := range v {
		c += e - m
	}
	return m + c/float64(len(v))
}

// stdOf is the sample standard deviation of v (divisor len(v) − 1).
func stdOf(v []float64) float64 {
	m := meanOf(v)
	var ss float64
	for _, e := range v {
		ss += (e - m) * (e - m)
	}
	return math.Sqrt(ss / float64(len(v)-1))
}

// Validation is the check of a GUM coverage interval y ± U against a Monte
// Carlo one [Low, High] (JCGM 101:2008 §8.2): DLow = |y − U − y_low|, DHigh =
// |y + U − y_high|, and the GUM result is validated when both are at most
// Tolerance, δ of the GUM standard uncertainty at the reported digits
// (§7.9.2, §8.1).
type Validation struct {
	DLow, DHigh, Tolerance float64
	Validated              bool
}

// Validate compares the GUM interval y ± U (standard uncertainty u reported
// to digits significant digits) with the Monte Carlo interval [low, high]
// (JCGM 101 §8.2).
func Validate(y, u, U, low, high float64, digits int) Validation {
	v := Validation{DLow: math.Abs(y - U - low), DHigh: math.Abs(y + U - high), Tolerance: NumericalTolerance(u, digits)}
	v.Validated = v.Tolerance > 0 && v.DLow <= v.Tolerance && v.DHigh <= v.Tolerance
	return v
}

// ChiSquare draws from the χ² distribution with nu > 0 degrees of freedom:
// 2·Gamma(ν/2), Gamma by Marsaglia and Tsang (ACM TOMS 26 (2000) 363–372),
// with the boost Gamma(a) = Gamma(a + 1)·U^(1/a) for a < 1. It is the draw
// behind a pooled Type A scale sqrt(ν/χ²_ν) (JCGM 101 §6.4.9), for every
// Monte Carlo that needs one.
func ChiSquare(rng *rand.Rand, nu float64) float64 {
	a := nu / 2
	boost := 1.0
	if a < 1 {
		boost = math.Pow(rng.Float64(), 1/a)
		a++
	}
	d := a - 1.0/3
	c := 1 / math.Sqrt(9*d)
	for {
		x := rng.NormFloat64()
		v := 1 + c*x
		if v <= 0 {
			continue
		}
		v = v * v * v
		u := rng.Float64()
		if u < 1-0.0331*x*x*x*x || math.Log(u) < 0.5*x*x+d*(1-v+math.Log(v)) {
			return 2 * d * v * boost
		}
	}
}
