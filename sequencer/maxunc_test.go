package sequencer

import (
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"trimline/sequencer/fit"
	"trimline/sequencer/uncertainty"
)

// demoLikeAnalysis is an 11-point sweep like the demo's: ±10 mV in, gain 200,
// 8 readings a point, pooled s = 7.4 µV (ν = 77), a few residuals of tens of µV.
func demoLikeAnalysis(tb testing.TB) analysis {
	tb.Helper()
	n := 11
	x, y, ur, dof := make([]float64, n), make([]float64, n), make([]float64, n), make([]float64, n)
	bend := []float64{0, 40e-6, -30e-6, 10e-6, 60e-6, -80e-6, 20e-6, 0, -10e-6, 35e-6, 5e-6}
	for i := range n {
		x[i] = -10e-3 + 2e-3*float64(i)
		y[i] = 2.5 + 200*x[i] + bend[i]
		ur[i] = 7.4e-6 / 2.8284271247461903
		dof[i] = 77
	}
	s := uncertainty.Sweep{X: x, Y: y, URandom: ur, DOFRandom: dof, PooledRandom: true,
		Meter:           uncertainty.Spec{OfReading: 30e-6, OfRange: 5e-6, Range: 10},
		MeterResolution: 1e-6,
		Source:          uncertainty.Spec{OfReading: 20e-6, OfRange: 5e-6, Range: 0.1}}
	lf, err := uncertainty.FitLine(s)
	if err != nil {
		tb.Fatal(err)
	}
	a := analysis{sw: s, lf: lf, poolDOF: 77}
	a.sum.Residuals = lf.Residuals
	return a
}

func BenchmarkNonlinearityMC(b *testing.B) {
	a := demoLikeAnalysis(b)
	for b.Loop() {
		if _, _, _, _, err := nonlinearityMC(a, 1, 4, 0.9545, "bench"); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkMaxErrorMC(b *testing.B) {
	a := demoLikeAnalysis(b)
	for b.Loop() {
		maxErrorMC(a, 200, 2.5, 0.9545, "bench")
	}
}

// flatAnalysis is an n-point sweep whose means lie exactly on y = 200·x + 2.5
// plus dev, each mean with standard uncertainty sigma from a pooled estimate
// of nu degrees of freedom (+Inf: known), no specs and no resolution unless
// the caller adds them.
func flatAnalysis(tb testing.TB, dev []float64, sigma, nu float64) analysis {
	tb.Helper()
	n := len(dev)
	x, y, ur, dof := make([]float64, n), make([]float64, n), make([]float64, n), make([]float64, n)
	for i := range n {
		x[i] = -10e-3 + 20e-3*float64(i)/float64(max(n-1, 1))
		y[i] = 2.5 + 200*x[i] + dev[i]
		ur[i], dof[i] = sigma, nu
	}
	s := uncertainty.Sweep{X: x, Y: y, URandom: ur, DOFRandom: dof, PooledRandom: true}
	a := analysis{sw: s, poolDOF: nu}
	if n >= 2 {
		lf, err := uncertainty.FitLine(s)
		if err != nil {
			tb.Fatal(err)
		}
		a.lf, a.sum.Residuals = lf, lf.Residuals
	}
	return a
}

// normQuantile is Φ⁻¹(q).
func normQuantile(q float64) float64 { return math.Sqrt2 * math.Erfinv(2*q-1) }

// The largest of N independent |N(0, σ²)| errors has the distribution
// function F(m) = (2Φ(m/σ) − 1)^N (the maximum of independent variables,
// F_max = F^N; from memory, any text on order statistics). With every
// deviation 0, no systematic error and a known σ, the Monte Carlo of max_error
// must give JCGM 101 §7.7's probabilistically symmetric interval of that
// distribution, and its mean E[max] = ∫₀^∞ (1 − F(m)) dm as the bias of the
// observed maximum 0.
func TestMaxErrorMCMatchesOrderStatistics(t *testing.T) {
	const n, sigma, p = 11, 2e-6, 0.9545
	a := flatAnalysis(t, make([]float64, n), sigma, math.Inf(1))
	v, u, U, mu, _ := maxErrorMC(a, 200, 2.5, p, "order statistics")
	quant := func(q float64) float64 { return sigma * normQuantile((1+math.Pow(q, 1.0/n))/2) }
	var mean float64
	for m, dm := 0.0, sigma/2000; m < 12*sigma; m += dm { // trapezoid: F is smooth
		f := func(m float64) float64 { return 1 - math.Pow(2*0.5*math.Erfc(-m/sigma/math.Sqrt2)-1, n) }
		mean += (f(m) + f(m+dm)) / 2 * dm
	}
	lo, hi := quant((1-p)/2), quant((1+p)/2)
	if v != 0 || mu.Points != n || mu.Trials != MaxTrials {
		t.Fatalf("value %g, points %d, trials %d; want 0, %d, %d", v, mu.Points, mu.Trials, n, MaxTrials)
	}
	// Tolerances: about three standard errors of each estimate at MaxTrials trials
	// (an end point of the interval ≈ 1 %, the mean ≈ 0.3 %).
	for _, c := range []struct {
		what      string
		got, want float64
		rel       float64
	}{
		{"low", mu.Low, lo, 0.04}, {"high", mu.High, hi, 0.03}, {"mean (bias)", mu.Bias, mean, 0.01},
		{"U = high − value", U, hi, 0.03},
	} {
		if math.Abs(c.got-c.want) > c.rel*c.want {
			t.Errorf("%s = %.5g, want %.5g (±%.1f %%)", c.what, c.got, c.want, 100*c.rel)
		}
	}
	if !(u > 0.3*sigma && u < sigma) {
		t.Errorf("u = %g: the spread of a maximum of 11 half-normals is well below σ = %g", u, sigma)
	}
}

// One point, deviation 0, Type A from a pooled s with ν = 4: the maximum is
// |e| with e a scaled and shifted t with 4 degrees of freedom (JCGM 101
// §6.4.9.7), drawn here as a normal error at a scale drawn from its scaled
// inverse χ² (JCGM 101 §6.4.9.2): the interval of |t₄| has ends at
// t₄ quantiles (JCGM 100 G.3).
func TestMaxErrorMCPooledScaleGivesT(t *testing.T) {
	const sigma, nu, p = 1e-6, 4, 0.9545
	a := flatAnalysis(t, []float64{0}, sigma, nu)
	_, _, _, mu, _ := maxErrorMC(a, 200, 2.5, p, "t")
	lo := sigma * uncertainty.CoverageFactor((1-p)/2, nu) // |t| quantile q is t's (1+q)/2
	hi := sigma * uncertainty.CoverageFactor((1+p)/2, nu)
	if math.Abs(mu.Low-lo) > 0.05*lo || math.Abs(mu.High-hi) > 0.04*hi {
		t.Errorf("interval [%.4g, %.4g], want [%.4g, %.4g] (|t₄| quantiles)", mu.Low, mu.High, lo, hi)
	}
}

// Where one deviation stands far above the rest, the maximum is that point's
// deviation and the model is linear where it matters: the Monte Carlo must
// then agree with the law of propagation for that point (JCGM 101 §8, the
// validation of the GUM result), u = σ and U = 2σ at 95.45 % (k = 2.000,
// JCGM 100 G.3 for ν = ∞), no bias.
func TestMaxErrorMCDominantPointIsGUM(t *testing.T) {
	const sigma = 3e-6
	dev := make([]float64, 11)
	dev[4] = 1e-3
	a := flatAnalysis(t, dev, sigma, math.Inf(1))
	v, u, U, mu, imax := maxErrorMC(a, 200, 2.5, 0.9545, "dominant")
	if imax != 4 || math.Abs(v-1e-3) > 1e-12 {
		t.Fatalf("maximum %g at %d, want 1e-3 at 4", v, imax)
	}
	if math.Abs(u-sigma) > 0.02*sigma || math.Abs(U-2*sigma) > 0.03*2*sigma || math.Abs(mu.Bias) > 0.03*sigma {
		t.Errorf("u = %.4g, U = %.4g, bias = %.3g; want %.4g, %.4g, 0", u, U, mu.Bias, sigma, 2*sigma)
	}
}

// bruteNonlinearity is the Monte Carlo of the nonlinearity done the plain way,
// for comparison: every point's error drawn (the pooled scale once a trial),
// the line refitted with fit.Weighted, the largest residual taken.
func bruteNonlinearity(t *testing.T, a analysis, trials int) []float64 {
	t.Helper()
	s := a.sw
	n := len(s.X)
	u, err := s.PointU()
	if err != nil {
		t.Fatal(err)
	}
	d := newMaxDraw(a, "brute")
	y := make([]float64, n)
	out := make([]float64, trials)
	for k := range out {
		lam := d.scale()
		gm := d.rect(d.aGm)
		om := d.rect(d.aOm)
		for i := range n {
			e := lam*d.ur[i]*d.rng.NormFloat64() + d.rect(d.half)
			y[i] = (s.Y[i] - e - om) / (1 + gm)
		}
		r, err := fit.Weighted(s.X, y, u, 1, s.X0, true)
		if err != nil {
			t.Fatal(err)
		}
		for _, v := range r.Residuals {
			out[k] = math.Max(out[k], math.Abs(v))
		}
	}
	return out
}

// The Monte Carlo of the nonlinearity sets aside points that cannot hold the
// maximum and draws the others' part of the refit at once; it must give the
// distribution of the plain propagation of every point's error through the
// refit and the maximum (JCGM 101 §5.9, §7.5), on a sweep where a few points
// compete and on one where all do (every residual 0).
func TestNonlinearityMCMatchesPlainPropagation(t *testing.T) {
	for _, c := range []struct {
		name string
		a    analysis
	}{
		{"demo-like", demoLikeAnalysis(t)},
		{"straight", flatAnalysis(t, make([]float64, 11), 2.6e-6, 77)},
		{"two close", flatAnalysis(t, []float64{0, 0, 0, 30e-6, 0, 0, 0, 0, -25e-6, 0, 0}, 2.6e-6, 77)},
	} {
		t.Run(c.name, func(t *testing.T) {
			v, u, _, mu, err := nonlinearityMC(c.a, 1, 1, 0.9545, "fast")
			if err != nil {
				t.Fatal(err)
			}
			ref := bruteNonlinearity(t, c.a, 40_000)
			ru, _, rmu := maxOutcome(v, ref, 0.9545)
			// About three standard errors of the difference of the two estimates
			// (4·10⁴ plain trials, MaxTrials fast ones): mean ±4·u/115, u ±1.5 %
			// (2.5 of them: leaving out part of the refit moves u by 4 %), the
			// interval's ends ±3 % of its width.
			if math.Abs(mu.Mean-rmu.Mean) > 4*ru/115 || math.Abs(u-ru) > 0.015*ru ||
				math.Abs(mu.High-rmu.High) > 0.03*(rmu.High-rmu.Low) || math.Abs(mu.Low-rmu.Low) > 0.03*(rmu.High-rmu.Low) {
				t.Errorf("fast: mean %.5g u %.4g [%.5g, %.5g]; plain: mean %.5g u %.4g [%.5g, %.5g]",
					mu.Mean, u, mu.Low, mu.High, rmu.Mean, ru, rmu.Low, rmu.High)
			}
		})
	}
}

// The same seed gives the same trials (a replay re-derives the record); another
// seed gives other trials.
func TestMaxMCDeterministic(t *testing.T) {
	a := demoLikeAnalysis(t)
	_, u1, U1, m1, _ := nonlinearityMC(a, 1, 4, 0.9545, "run/verify fit/post_nonlinearity")
	_, u2, U2, m2, _ := nonlinearityMC(a, 1, 4, 0.9545, "run/verify fit/post_nonlinearity")
	_, u3, _, _, _ := nonlinearityMC(a, 1, 4, 0.9545, "other run/verify fit/post_nonlinearity")
	if u1 != u2 || U1 != U2 || m1 != m2 {
		t.Errorf("same seed, different results: %v %v %+v / %v %v %+v", u1, U1, m1, u2, U2, m2)
	}
	if u1 == u3 {
		t.Errorf("another seed gave the same u %v", u1)
	}
}

// selectKth returns the order statistic a sort gives.
func TestSelectKth(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for _, n := range []int{1, 2, 3, 10, 1001} {
		vs := make([]float64, n)
		for i := range vs {
			vs[i] = math.Round(rng.Float64() * 20) // ties
		}
		sorted := slices.Clone(vs)
		slices.Sort(sorted)
		for _, k := range []int{0, n / 3, n - 1} {
			if got := selectKth(slices.Clone(vs), k); got != sorted[k] {
				t.Errorf("n %d k %d: %v, want %v", n, k, got, sorted[k])
			}
		}
	}
}
