package sequencer

// The uncertainty of a maximum-type result (nonlinearity, max_error) by a
// Monte Carlo of the maximum (JCGM 101:2008).
//
// The largest of N noisy deviations is not a linear function of the points:
// its expectation lies above the observed largest deviation wherever several
// deviations are comparable (the maximum of noisy values is biased upward),
// and its spread is not that of the one point where the maximum fell. JCGM 101
// §5 propagates the distributions of the inputs through the model itself
// instead of its linearisation: each trial draws every input, evaluates the
// maximum, and the trials give the distribution of the maximum (§7).
//
// What is reported:
//
//   - the value is the observed maximum (the model evaluated at the input
//     estimates, as for every other result), not corrected for its bias: the
//     bias depends on the unknown true deviations, and the Monte Carlo estimate
//     of it (MaxUnc.Bias = mean of the trials − observed value) is recorded for
//     the reader instead;
//   - [MaxUnc.Low, MaxUnc.High] is the probabilistically symmetric coverage
//     interval of the trials at the record's coverage probability (JCGM 101
//     §7.7);
//   - u is the standard deviation of the trials (JCGM 101 §7.6), and U is the
//     smallest half-width about the reported value that contains that coverage
//     interval, U = max(High − value, value − Low), so that "value ± U" on the
//     certificate holds the whole interval (its coverage probability is at least
//     the stated one); k = U/u. An upward bias widens U on the upper side,
//     which is the side a limit on a maximum judges.

import (
	"encoding/binary"
	"fmt"
	"hash/fnv"
	"math"
	"math/rand/v2"

	"trimline/sequencer/fit"
	"trimline/sequencer/uncertainty"
)

// MaxTrials is the number of Monte Carlo trials of the maximum of a sweep's
// deviations (nonlinearity, max_error), fixed so that the result is a
// deterministic function of the seed, and small enough to run on every unit
// (and on every unit a test or a replay runs). The standard error of an end
// point of the 95.45 % coverage interval of a near-normal output is
// sqrt(p(1 − p)/M)/f(y_p) ≈ 2.8·u/√M (the asymptotic variance of a sample
// quantile, from memory): about 1 % of U at M = 2·10⁴, and that of u is
// u/√(2M) = 0.5 %. Over 20 seeds, U of demo-like nonlinearities varied by
// 0.6 % to 1.1 % (sd). So U is stated to two significant digits within one
// unit of the second digit; JCGM 101 §7.9.2's numerical tolerance (half a unit
// of the second digit, twice the standard error inside it) holds where U's
// first two digits are at most about 25. JCGM 101 §7.2.2's M = 10⁴/(1 − p)
// (2.2·10⁵ at 95.45 %) would meet it for every leading digit at eleven times
// the time on every unit.
const MaxTrials = 20_000

// MaxUnc is how the uncertainty of a maximum-type result was evaluated: by
// Monte Carlo of the maximum of Points deviations with Trials trials (JCGM
// 101:2008). Mean, Bias, Low and High are in the unit of the result's value.
// The zero value means the result is not a maximum evaluated this way.
type MaxUnc struct {
	Points int `json:"points"` // N, the deviations the maximum is taken over
	Trials int `json:"trials"` // M, the Monte Carlo trials
	// Mean is the mean of the trials' maxima; Bias = Mean − value, the
	// estimated upward bias of the observed maximum (not corrected).
	Mean float64 `json:"mean"`
	Bias float64 `json:"bias"`
	// Low and High are the probabilistically symmetric coverage interval of
	// the trials at the record's coverage probability (JCGM 101 §7.7).
	Low  float64 `json:"low"`
	High float64 `json:"high"`
}

// MethodMaxMC is Uncertainty.Method of a result whose uncertainty is the
// Monte Carlo of its maximum (MaxUnc).
const MethodMaxMC = "MC-max"

// maxDraw draws one trial's errors of the model of the package uncertainty's
// doc (the line fit's model, with the sweep's specs): the random error of every
// point's mean, with the pooled Type A scale drawn once per trial, the
// rounding of every point, and the four shared systematic errors.
type maxDraw struct {
	pcg    *rand.PCG  // the generator: uniforms straight from it,
	rng    *rand.Rand // normals through math/rand's ziggurat
	ur     []float64  // URandom_i, the Type A standard uncertainty of each mean at the pooled s
	nu     float64    // degrees of freedom of the pooled s (+Inf: known scale)
	half   float64    // half a resolution step
	aGm    float64    // half-widths of the rectangular systematic errors
	aOm    float64
	aGs    float64
	aOs    float64
	zero   bool    // the source offset is measured (SourceZero): t or normal
	zeroU  float64 // its standard uncertainty
	zeroNu float64 // and dof
}

func newMaxDraw(a analysis, seed string) *maxDraw {
	h := fnv.New64a()
	h.Write([]byte(seed))
	s := a.sw
	pcg := rand.NewPCG(h.Sum64(), 0x2545f4914f6cdd1d)
	d := &maxDraw{
		pcg: pcg, rng: rand.New(pcg),
		ur: make([]float64, len(s.X)), nu: a.poolDOF, half: s.MeterResolution / 2,
		aGm: s.Meter.OfReading, aOm: s.Meter.OfRange * s.Meter.Range,
		aGs: s.Source.OfReading, aOs: s.Source.OfRange * s.Source.Range,
	}
	if s.URandom != nil {
		copy(d.ur, s.URandom)
	}
	if z := s.SourceZero; z != nil {
		d.zero, d.zeroU, d.zeroNu = true, z.U, z.DOF
	}
	return d
}

// rect draws from the rectangular distribution on [−a, a).
func (d *maxDraw) rect(a float64) float64 {
	return a * (float64(d.pcg.Uint64()>>11)*0x1p-52 - 1)
}

// scale is one trial's factor on the pooled standard deviation: s_p is an
// estimate with ν degrees of freedom, so σ/s_p is distributed as sqrt(ν/χ²_ν)
// (the scaled inverse chi-square of a Type A evaluation, whose mixture with
// the normal error of each mean gives that mean's scaled and shifted t, JCGM
// 101 §6.4.9). One draw serves every point: they share the one estimate.
func (d *maxDraw) scale() float64 {
	if math.IsInf(d.nu, 1) || !(d.nu > 0) {
		return 1
	}
	return math.Sqrt(d.nu / uncertainty.ChiSquare(d.rng, d.nu))
}

// tail is the number of standard deviations beyond which a normal error is
// taken never to reach: P(|z| > 9) = 2·10⁻¹⁹ (from memory), so over the
// trials of every unit a station will ever run, a point set aside because its
// deviation could not reach the maximum within that bound changes no trial.
// Setting such points aside is what makes the Monte Carlo cheap where a few
// points stand clear of the rest (the usual case); on paper, where every
// deviation is 0, every point stays in.
const tail = 9

// rects fills r with rectangular draws on [−a, a), two from each 64 bits of
// the generator (32 bits of resolution each, far below any resolution step).
func (d *maxDraw) rects(r []float64, a float64) {
	if a == 0 {
		clear(r)
		return
	}
	for i := 0; i < len(r); i += 2 {
		v := d.pcg.Uint64()
		r[i] = a * (float64(v>>32)*0x1p-31 - 1)
		if i+1 < len(r) {
			r[i+1] = a * (float64(v&0xffffffff)*0x1p-31 - 1)
		}
	}
}

// systematic draws the four shared errors g_m, o_m, g_s, o_s.
func (d *maxDraw) systematic() (gm, om, gs, os float64) {
	gm, om, gs, os = d.rect(d.aGm), d.rect(d.aOm), d.rect(d.aGs), d.rect(d.aOs)
	if d.zero {
		if math.IsInf(d.zeroNu, 1) {
			os = d.zeroU * d.rng.NormFloat64()
		} else {
			os = d.zeroU * math.Sqrt(d.zeroNu/uncertainty.ChiSquare(d.rng, d.zeroNu)) * d.rng.NormFloat64()
		}
	}
	return gm, om, gs, os
}

// maxOutcome summarises the trials' maxima against the observed value v at
// coverage probability p: u, U, and MaxUnc.
func maxOutcome(v float64, vs []float64, p float64) (u, U float64, mu MaxUnc) {
	var mean float64
	mean, u = uncertainty.MeanStd(vs)
	lo, hi := uncertainty.SymmetricRanks(len(vs), p)
	low := selectKth(vs, lo)
	high := selectKth(vs[lo:], hi-lo) // selectKth left every smaller value before lo
	mu = MaxUnc{Trials: len(vs), Mean: mean, Bias: mean - v, Low: low, High: high}
	U = math.Max(mu.High-v, v-mu.Low)
	return u, U, mu
}

// maxSeed is the seed of the Monte Carlo of result name: the step, the result
// (on its channel) and the bits of every point the fit used, so that the
// trials are a function of the record's own numbers: a replay draws the same
// ones, as does any run with the same readings (two descriptions of one flow
// give identical records), and no two results share a stream. The run id is
// left out for that reason: it differs between runs of identical readings.
func maxSeed(u *Unit, name string, a analysis) string {
	h := fnv.New64a()
	var b [8]byte
	for _, vs := range [][]float64{a.sw.X, a.sw.Y} {
		for _, v := range vs {
			binary.LittleEndian.PutUint64(b[:], math.Float64bits(v))
			h.Write(b[:])
		}
	}
	return fmt.Sprintf("%s/%s/%016x", u.step.Name, u.key(name), h.Sum64())
}

// setMaxU sets result name from the Monte Carlo of its maximum that mc
// evaluates with the result's seed: the observed maximum, u the standard
// deviation of the trials, U the half-width about the value that holds their
// coverage interval, k = U/u, and dof for the decision's use of a t
// distribution (the Welch–Satterthwaite ν of the GUM uncertainty of the point
// where the maximum fell; k does not come from it).
func setMaxU(u *Unit, name string, a analysis, dof float64, mc func(seed string) (v, std, U float64, mu MaxUnc, err error)) {
	v, std, U, mu, err := mc(maxSeed(u, name, a))
	if err != nil {
		u.Invalid(name, "uncertainty of the maximum: "+err.Error())
		return
	}
	unc := u.IntervalUnc(std, dof, U)
	unc.Method, unc.Max = MethodMaxMC, mu
	u.SetU(name, v, unc)
}

// selectKth returns the k-th smallest of vs (0-based), reordering vs so that
// vs[:k] hold values ≤ it and vs[k+1:] values ≥ it (Hoare's selection with a
// median-of-three pivot; expected linear time, where a sort of the trials
// would take much of the Monte Carlo's time).
func selectKth(vs []float64, k int) float64 {
	lo, hi := 0, len(vs)-1
	for lo < hi {
		mid := lo + (hi-lo)/2
		if vs[mid] < vs[lo] {
			vs[mid], vs[lo] = vs[lo], vs[mid]
		}
		if vs[hi] < vs[lo] {
			vs[hi], vs[lo] = vs[lo], vs[hi]
		}
		if vs[hi] < vs[mid] {
			vs[hi], vs[mid] = vs[mid], vs[hi]
		}
		pivot := vs[mid]
		i, j := lo, hi
		for i <= j {
			for vs[i] < pivot {
				i++
			}
			for vs[j] > pivot {
				j--
			}
			if i <= j {
				vs[i], vs[j] = vs[j], vs[i]
				i++
				j--
			}
		}
		switch {
		case k <= j:
			hi = j
		case k >= i:
			lo = i
		default:
			return vs[k]
		}
	}
	return vs[k]
}

// lineOfErrors is what a trial needs to refit its errors with the fit's
// weights: the weighted least-squares coefficients of point j's unit error,
// a[k][j], and the basis (x_i − X0)^k, so that the fit of errors e is
// ŷ_i = Σ_k (x_i − X0)^k · c_k with c_k = Σ_j a[k][j]·e_j.
type lineOfErrors struct {
	a     [][]float64 // [k][j]
	basis [][]float64 // [k][i]
}

func newLineOfErrors(a analysis, order int) (*lineOfErrors, error) {
	s := a.sw
	n := len(s.X)
	u, err := s.PointU()
	if err != nil {
		return nil, err
	}
	if u == nil { // no random uncertainty: ordinary least squares
		u = make([]float64, n)
		for i := range u {
			u[i] = 1
		}
	}
	p := order + 1
	l := &lineOfErrors{a: make([][]float64, p), basis: make([][]float64, p)}
	for k := range p {
		l.a[k] = make([]float64, n)
		l.basis[k] = make([]float64, n)
		for i := range n {
			l.basis[k][i] = math.Pow(s.X[i]-s.X0, float64(k))
		}
	}
	unit := make([]float64, n)
	for j := range n {
		clear(unit)
		unit[j] = 1
		r, err := fit.Weighted(s.X, unit, u, order, s.X0, true)
		if err != nil {
			return nil, err
		}
		for k := range p {
			l.a[k][j] = r.Coef[k]
		}
	}
	return l, nil
}

// hat is H[i][j] = ∂ŷ_i/∂e_j.
func (l *lineOfErrors) hat(i, j int) float64 {
	var h float64
	for k := range l.a {
		h += l.basis[k][i] * l.a[k][j]
	}
	return h
}

// nonlinearityMC is the Monte Carlo of the nonlinearity max_i |ρ_i| / full
// scale, ρ the residuals of the line (or quadratic) through the true outputs
// η_i at the true stimuli ξ_i. With the model of the package uncertainty's doc,
// η = (y − e − o_m)/(1 + g_m) (e the random error of each mean and its
// rounding) and ξ = x·(1 + g_s) + o_s: the fit is linear in η and has a
// constant term, and ξ is an affine map of x (which leaves a polynomial fit's
// residuals unchanged), so ρ = (res − e + ŷ(e))/(1 + g_m) exactly, ŷ(e) being
// the fit of the errors alone. Of the four systematic errors only the meter's
// gain reaches ρ. Each trial draws the pooled scale once, every point's
// rounding, g_m, and the normal error of each point that could hold the
// maximum (within tail standard deviations); the other points' normal errors
// reach the candidates only through ŷ(e), whose part from them is drawn at
// once from its exact normal distribution given the scale (covariance
// Σ_j a_j·a_jᵀ·URandom_j²), so that no point's error is left out.
func nonlinearityMC(a analysis, order int, fullScale, p float64, seed string) (v, u, U float64, mu MaxUnc, err error) {
	l, err := newLineOfErrors(a, order)
	if err != nil {
		return 0, 0, 0, MaxUnc{}, err
	}
	d := newMaxDraw(a, seed)
	res := a.sum.Residuals
	n, q := len(res), order+1
	for _, r := range res {
		v = math.Max(v, math.Abs(r))
	}
	v /= fullScale
	// Bounds of each point's own error and of the fit of all errors there:
	// per unit scale (normal parts, tail σ) and from the rounding.
	ownN, fitN, fitR := d.ur, make([]float64, n), make([]float64, n)
	for i := range n {
		var sn, sr float64
		for j := range n {
			h := l.hat(i, j)
			sn += h * h * d.ur[j] * d.ur[j]
			sr += math.Abs(h)
		}
		fitN[i], fitR[i] = math.Sqrt(sn), sr*d.half
	}
	all := make([]float64, q*q) // Σ_j a_j·a_jᵀ·URandom_j², per unit scale
	for j := range n {
		for k := range q {
			for m := range q {
				all[k*q+m] += l.a[k][j] * l.a[m][j] * d.ur[j] * d.ur[j]
			}
		}
	}
	rr, b, en := make([]float64, n), make([]float64, n), make([]float64, n)
	cov, low, c := make([]float64, q*q), make([]float64, q*q), make([]float64, q)
	cand := make([]int, 0, n)
	vs := make([]float64, MaxTrials)
	for t := range vs {
		lam := d.scale()
		gm := d.rect(d.aGm)
		d.rects(rr, d.half)
		floor := math.Inf(-1)
		for i := range n {
			b[i] = lam*tail*(ownN[i]+fitN[i]) + d.half + fitR[i]
			if f := math.Abs(res[i]) - b[i]; f > floor {
				floor = f
			}
		}
		cand = cand[:0]
		copy(cov, all)
		for i := range n {
			if math.Abs(res[i])+b[i] >= floor {
				cand = append(cand, i)
				en[i] = lam * d.ur[i] * d.rng.NormFloat64()
				for k := range q {
					for m := range q {
						cov[k*q+m] -= l.a[k][i] * l.a[m][i] * d.ur[i] * d.ur[i]
					}
				}
			}
		}
		// c = fit of the errors: every rounding, the candidates' normal
		// errors, and the rest's normal errors drawn together.
		cholesky(cov, low, q)
		for k := range q {
			var ck float64
			for j := range n {
				ck += l.a[k][j] * rr[j]
			}
			for _, j := range cand {
				ck += l.a[k][j] * en[j]
			}
			c[k] = ck
		}
		for m := range q {
			z := lam * d.rng.NormFloat64()
			for k := m; k < q; k++ {
				c[k] += low[k*q+m] * z
			}
		}
		var mx float64
		for _, i := range cand {
			f := 0.0
			for k := range q {
				f += c[k] * l.basis[k][i]
			}
			if r := math.Abs(res[i] - en[i] - rr[i] + f); r > mx {
				mx = r
			}
		}
		vs[t] = mx / (1 + gm) / fullScale
	}
	u, U, mu = maxOutcome(v, vs, p)
	mu.Points = n
	return v, u, U, mu, nil
}

// cholesky writes into low the lower-triangular factor L of the q×q
// covariance cov (row-major, L·Lᵀ = cov), a pivot that rounding left at or
// below 0 giving a zero column (the covariance of what is left after the
// candidates are taken out may be zero to rounding).
func cholesky(cov, low []float64, q int) {
	clear(low)
	for j := range q {
		s := cov[j*q+j]
		for k := range j {
			s -= low[j*q+k] * low[j*q+k]
		}
		if !(s > 0) {
			continue
		}
		ljj := math.Sqrt(s)
		low[j*q+j] = ljj
		for i := j + 1; i < q; i++ {
			t := cov[i*q+j]
			for k := range j {
				t -= low[i*q+k] * low[j*q+k]
			}
			low[i*q+j] = t / ljj
		}
	}
}

// maxErrorMC is the Monte Carlo of the largest deviation from the ideal
// transfer, max_i |η_i − (G·ξ_i + O)|, with η_i = (y_i − e_i −
// o_m)/(1 + g_m) and ξ_i = x_i·(1 + g_s) + o_s (exactly, not linearised; e_i
// the random error of the mean and its rounding): each trial draws the four
// shared systematic errors, which move every deviation together, the pooled
// scale once, every point's rounding, and the normal error of each point that
// could hold the maximum within tail standard deviations (the others' errors
// are independent and cannot change the maximum). It returns the index of the
// point where the observed maximum fell as imax.
func maxErrorMC(a analysis, gain, offset, p float64, seed string) (v, u, U float64, mu MaxUnc, imax int) {
	s := a.sw
	n := len(s.X)
	for i := range n {
		if dv := math.Abs(s.Y[i] - (gain*s.X[i] + offset)); dv > v {
			v, imax = dv, i
		}
	}
	d := newMaxDraw(a, seed)
	rr, dev, b := make([]float64, n), make([]float64, n), make([]float64, n)
	vs := make([]float64, MaxTrials)
	for t := range vs {
		gm, om, gs, os := d.systematic()
		lam := d.scale()
		d.rects(rr, d.half)
		floor := math.Inf(-1)
		for i := range n {
			dev[i] = (s.Y[i]-om)/(1+gm) - (gain*(s.X[i]*(1+gs)+os) + offset)
			b[i] = (lam*tail*d.ur[i] + d.half) / (1 + gm)
			if f := math.Abs(dev[i]) - b[i]; f > floor {
				floor = f
			}
		}
		var mx float64
		for i := range n {
			if math.Abs(dev[i])+b[i] < floor {
				continue
			}
			e := rr[i]
			if d.ur[i] > 0 {
				e += lam * d.ur[i] * d.rng.NormFloat64()
			}
			if r := math.Abs(dev[i] - e/(1+gm)); r > mx {
				mx = r
			}
		}
		vs[t] = mx
	}
	u, U, mu = maxOutcome(v, vs, p)
	mu.Points = n
	return v, u, U, mu, imax
}
