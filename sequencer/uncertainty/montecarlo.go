package uncertainty

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
)

// MinTrials is the smallest number of Monte Carlo trials MonteCarlo accepts.
// JCGM 101:2008 §7.2 recommends M ≥ 10⁴/(1 − p) (2·10⁵ for p = 0.95) for a
// reliable coverage interval; fewer trials are allowed for quick checks.
const MinTrials = 100

// MCResult is the outcome of MonteCarlo: index 0 is b0 (V), index 1 is b1
// (V/V). Mean and Std are the sample mean and standard deviation (divisor M
// − 1) of the M trial values, Cov their sample covariance, [Low, High] the
// probabilistically symmetric coverage interval of each coefficient alone
// (JCGM 101 §7.7), and Trials = M.
type MCResult struct {
	Mean      [2]float64
	Std       [2]float64
	Cov       [2][2]float64
	Low, High [2]float64
	Trials    int
}

// MonteCarlo propagates distributions (JCGM 101:2008) through the line fit
// of the package doc's model, with the 95 % coverage interval; it is
// MonteCarloCoverage(s, trials, seed, 0.95).
func MonteCarlo(s Sweep, trials int, seed uint64) (MCResult, error) {
	return MonteCarloCoverage(s, trials, seed, 0.95)
}

// MonteCarloCoverage propagates distributions (JCGM 101:2008) through the
// line fit: each of the M = trials trials draws
//
//   - for each point i, the random error of its mean: URandom_i·t with t
//     from Student's t with DOFRandom_i degrees of freedom when that is
//     finite (the scaled and shifted t of JCGM 101 §6.4.9; its standard
//     deviation is URandom_i·sqrt(ν/(ν−2)), larger than URandom_i), or
//     normal with standard deviation URandom_i when it is infinite;
//   - for each point, the rounding error, rectangular ±MeterResolution/2;
//   - once per trial, the four systematic errors g_m, o_m, g_s, o_s,
//     rectangular within the specs;
//
// corrects the data with them, x_i·(1+g_s) + o_s and (y_i − e_i − r_i −
// o_m)/(1+g_m) (exactly, not linearised), refits the line with FitLine's
// weights and centring, and collects (b0, b1). It returns their sample
// mean, standard deviation and covariance and the probabilistically
// symmetric coverage interval for coverage probability p of each
// coefficient (JCGM 101 §7.7: the order statistics y_(r) and y_(r+q), q =
// pM and r = (M − q)/2 each rounded to the nearest integer).
//
// The result is a deterministic function of (s, trials, seed, p): the
// generator is a PCG seeded with seed; there is no concurrency inside and no
// global state, so concurrent calls are safe. Time is about linear in
// trials·len(X); memory is 16 bytes per trial.
//
// Errors: those of FitLine for an invalid Sweep; ErrInvalidInput (wrapped)
// when trials < MinTrials or p is not in (0, 1).
func MonteCarloCoverage(s Sweep, trials int, seed uint64, p float64) (MCResult, error) {
	const fn = "uncertainty.MonteCarlo"
	if trials < MinTrials {
		return MCResult{}, fmt.Errorf("%s: %w: %d trials; at least %d are needed", fn, ErrInvalidInput, trials, MinTrials)
	}
	if !(p > 0 && p < 1) {
		return MCResult{}, fmt.Errorf("%s: %w: coverage probability %v is not in (0, 1)", fn, ErrInvalidInput, p)
	}
	// FitLine validates the sweep and fixes the weights.
	if _, err := FitLine(s); err != nil {
		return MCResult{}, err
	}
	n := len(s.X)
	w := s.mcWeights()
	halfRes := s.MeterResolution / 2
	aGm, aOm := s.Meter.OfReading, s.Meter.OfRange*s.Meter.Range // half-widths
	aGs, aOs := s.Source.OfReading, s.Source.OfRange*s.Source.Range

	rng := rand.New(rand.NewPCG(seed, 0x5851f42d4c957f2d))
	rect := func(a float64) float64 { return a * (2*rng.Float64() - 1) }
	xc, yc := make([]float64, n), make([]float64, n)
	v0, v1 := make([]float64, trials), make([]float64, trials)
	for t := range trials {
		egm, eom, egs, eos := rect(aGm), rect(aOm), rect(aGs), rect(aOs)
		if z := s.SourceZero; z != nil { // measured: t or normal about the applied estimate
			if math.IsInf(z.DOF, 1) {
				eos = z.U * rng.NormFloat64()
			} else {
				eos = z.U * studentT(rng, z.DOF)
			}
		}
		for i := range n {
			e := 0.0
			if ur := s.uRandom(i); ur > 0 {
				if nu := s.DOFRandom[i]; math.IsInf(nu, 1) {
					e = ur * rng.NormFloat64()
				} else {
					e = ur * studentT(rng, nu)
				}
			}
			if halfRes > 0 {
				e += rect(halfRes)
			}
			xc[i] = s.X[i]*(1+egs) + eos
			yc[i] = (s.Y[i] - e - eom) / (1 + egm)
		}
		v0[t], v1[t] = lineLS(xc, yc, w, s.X0)
	}

	res := MCResult{Trials: trials}
	vs := [2][]float64{v0, v1}
	m := float64(trials)
	for k, v := range vs {
		var sum float64
		for _, e := range v {
			sum += e
		}
		mean := sum / m
		var c float64
		for _, e := range v {
			c += e - mean
		}
		res.Mean[k] = mean + c/m
	}
	for j := range 2 {
		for k := j; k < 2; k++ {
			var c float64
			for t := range trials {
				c += (vs[j][t] - res.Mean[j]) * (vs[k][t] - res.Mean[k])
			}
			c /= m - 1
			res.Cov[j][k], res.Cov[k][j] = c, c
		}
		res.Std[j] = math.Sqrt(res.Cov[j][j])
	}
	q := nearestInt(p * m)
	r := nearestInt((m - q) / 2)
	lo, hi := int(r)-1, int(r+q)-1 // y_(r) is the r-th smallest, 1-based
	lo = max(lo, 0)
	hi = min(hi, trials-1)
	for k, v := range vs {
		slices.Sort(v)
		res.Low[k], res.High[k] = v[lo], v[hi]
	}
	return res, nil
}

// nearestInt rounds v to the nearest integer, treating values within a few
// ulps of an integer as that integer (p·M is rarely exact in binary).
func nearestInt(v float64) float64 {
	if r := math.Round(v); math.Abs(v-r) <= 1e-9*math.Max(1, math.Abs(v)) {
		return r
	}
	return math.Floor(v + 0.5)
}

// lineLS is the weighted least-squares line y = b0 + b1·(x − x0) in closed
// form, centred on the weighted means for accuracy; w are the weights. It is
// the allocation-free inner loop of MonteCarlo.
func lineLS(x, y, w []float64, x0 float64) (b0, b1 float64) {
	var sw, swx, swy float64
	for i := range x {
		sw += w[i]
		swx += w[i] * x[i]
		swy += w[i] * y[i]
	}
	xm, ym := swx/sw, swy/sw
	var sxx, sxy float64
	for i := range x {
		dx := x[i] - xm
		sxx += w[i] * dx * dx
		sxy += w[i] * dx * (y[i] - ym)
	}
	b1 = sxy / sxx
	return ym + b1*(x0-xm), b1
}

// studentT draws from Student's t with nu > 0 degrees of freedom by
// Bailey's polar method (Math. Comp. 62 (1994) 779–781): for (U, V) uniform
// in the unit disc, W = U² + V², T = U·sqrt(ν(W^(−2/ν) − 1)/W).
func studentT(rng *rand.Rand, nu float64) float64 {
	for {
		u := 2*rng.Float64() - 1
		v := 2*rng.Float64() - 1
		w := u*u + v*v
		if w > 1 || w == 0 {
			continue
		}
		return u * math.Sqrt(nu*(math.Pow(w, -2/nu)-1)/w)
	}
}

// mcWeights are the weights of FitLine's line, normalised to 1 at the
// smallest u_i (all 1 when no point has a random uncertainty).
func (s Sweep) mcWeights() []float64 {
	n := len(s.X)
	uRes := s.MeterResolution / (2 * math.Sqrt(3))
	w := make([]float64, n)
	for i := range n {
		w[i] = 1
	}
	if uRes > 0 || slices.ContainsFunc(s.URandom, func(v float64) bool { return v > 0 }) {
		umin := math.Inf(1)
		for i := range n {
			umin = math.Min(umin, math.Hypot(s.uRandom(i), uRes))
		}
		for i := range n {
			r := umin / math.Hypot(s.uRandom(i), uRes)
			w[i] = r * r
		}
	}
	return w
}
