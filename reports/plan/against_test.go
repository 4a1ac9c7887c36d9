package plan_test

import (
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"

	"gonum.org/v1/gonum/stat"
	"gonum.org/v1/gonum/stat/distuv"

	"trimline/reports/plan"
)

func normals(r *rand.Rand, n int, mean, sd float64) []float64 {
	xs := make([]float64, n)
	for i := range xs {
		xs[i] = mean + sd*r.NormFloat64()
	}
	return xs
}

// exactly rescales xs to the given mean and SD (n − 1).
func exactly(xs []float64, mean, sd float64) []float64 {
	m, s := stat.MeanStdDev(xs, nil)
	for i := range xs {
		xs[i] = mean + (xs[i]-m)/s*sd
	}
	return xs
}

func near(got, want, tol float64) bool { return math.Abs(got-want) <= tol }

// The published table of the two-sample test's large-sample critical values,
// D_α = c(α)·√((n + m)/(n·m)), gives c(α) to three digits ("Critical Values for
// the Two-sample Kolmogorov-Smirnov test (2-sided)", the table reprinted in many
// statistics texts; the same values, 1.22, 1.36 and 1.63 at 10, 5 and 1 %, are
// in the CERN "Data Analysis BriefBook", Kolmogorov test): the Kolmogorov
// distribution's upper tail at c(α) is α. With c rounded to ±0.005, α lies
// between Q(c + 0.005) and Q(c − 0.005).
func TestKolmogorovQAtPublishedCriticalValues(t *testing.T) {
	for _, c := range []struct{ alpha, c float64 }{
		{0.10, 1.22}, {0.05, 1.36}, {0.025, 1.48}, {0.01, 1.63}, {0.005, 1.73}, {0.001, 1.95},
	} {
		hi, lo := plan.KolmogorovQ(c.c-0.005), plan.KolmogorovQ(c.c+0.005)
		if !(lo <= c.alpha && c.alpha <= hi) {
			t.Errorf("Q(%g ± 0.005) = [%.5f, %.5f], does not hold α = %g", c.c, lo, hi, c.alpha)
		}
	}
	// Both series agree where they meet (λ = 1.18), and the ends.
	if a, b := plan.KolmogorovQ(1.18-1e-12), plan.KolmogorovQ(1.18); !near(a, b, 1e-10) {
		t.Errorf("Q at 1.18: %.12f from below, %.12f from above", a, b)
	}
	if q := plan.KolmogorovQ(0); q != 1 {
		t.Errorf("Q(0) = %g, want 1", q)
	}
	if q := plan.KolmogorovQ(0.2); !near(q, 1, 1e-12) {
		t.Errorf("Q(0.2) = %g, want 1 within 1e-12", q)
	}
	if q := plan.KolmogorovQ(5); q <= 0 || q > 1e-20 {
		t.Errorf("Q(5) = %g, want a tiny positive number", q)
	}
}

// The SciPy reference guide's example of scipy.stats.ks_2samp (SciPy before
// 1.3, whose p-value was the Kolmogorov upper tail at (√nₑ + 0.12 + 0.11/√nₑ)·D,
// the formula KS uses) prints, for samples of 200 and 300:
// D = 0.20833333333333337, p = 4.6674975515806989e-05, and
// D = 0.10333333333333333, p = 0.14498781825751686. The samples were random,
// so the check is of the p-value at those D.
func TestKSPValueSciPyExample(t *testing.T) {
	p := func(d float64, n, m int) float64 {
		en := math.Sqrt(float64(n*m) / float64(n+m))
		return plan.KolmogorovQ((en + 0.12 + 0.11/en) * d)
	}
	for _, c := range []struct{ d, want float64 }{
		{0.20833333333333337, 4.6674975515806989e-05},
		{0.10333333333333333, 0.14498781825751686},
	} {
		if got := p(c.d, 200, 300); !near(got/c.want, 1, 1e-6) {
			t.Errorf("D = %g: p = %.10g, SciPy printed %.10g", c.d, got, c.want)
		}
	}
}

func TestKSKnownSamples(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	x := normals(r, 500, 0, 1)
	// Identical samples: D = 0, p = 1.
	if d, p := plan.KS(x, slices.Clone(x)); d != 0 || p != 1 {
		t.Errorf("identical: D = %g, p = %g, want 0 and 1", d, p)
	}
	// Disjoint samples: D = 1.
	if d, p := plan.KS([]float64{1, 2, 3}, []float64{4, 5}); d != 1 || p > 0.1 {
		t.Errorf("disjoint: D = %g, p = %g, want 1 and small", d, p)
	}
	// By hand: {1,2,3,4} against {3,4,5,6}: after 2 the ECDFs are 1/2 and 0.
	if d, _ := plan.KS([]float64{1, 2, 3, 4}, []float64{3, 4, 5, 6}); d != 0.5 {
		t.Errorf("by hand: D = %g, want 0.5", d)
	}
	// Normals shifted by one SD: far apart.
	y := normals(r, 400, 1, 1)
	if d, p := plan.KS(x, y); d < 0.3 || p > 1e-10 {
		t.Errorf("shifted by 1 SD: D = %g, p = %g, want D > 0.3 and p < 1e-10", d, p)
	}
	// Same distribution: p is not small (seeded, so it is always the same).
	z := normals(r, 300, 0, 1)
	if _, p := plan.KS(x, z); p < 0.05 {
		t.Errorf("same distribution: p = %g", p)
	}
	// D agrees with gonum's stat.KolmogorovSmirnov (sorted inputs, no weights),
	// also with ties (integer codes).
	codes1, codes2 := make([]float64, 200), make([]float64, 150)
	for i := range codes1 {
		codes1[i] = math.Round(2048 + 3*r.NormFloat64())
	}
	for i := range codes2 {
		codes2[i] = math.Round(2049 + 3*r.NormFloat64())
	}
	for _, pair := range [][2][]float64{{x, y}, {x, z}, {codes1, codes2}} {
		a, b := slices.Sorted(slices.Values(pair[0])), slices.Sorted(slices.Values(pair[1]))
		d, _ := plan.KS(pair[0], pair[1])
		if g := stat.KolmogorovSmirnov(a, nil, b, nil); !near(d, g, 1e-12) {
			t.Errorf("D = %g, gonum %g", d, g)
		}
	}
	if d, p := plan.KS(nil, x); !math.IsNaN(d) || !math.IsNaN(p) {
		t.Errorf("empty side: %g %g, want NaN", d, p)
	}
}

// Hyndman and Fan's definition 7 worked by hand on 1…10: rank (n − 1)·p.
func TestQuantile(t *testing.T) {
	xs := []float64{1, 2, 3, 4, 5, 6, 7, 8, 9, 10}
	for _, c := range []struct{ p, want float64 }{
		{0, 1}, {0.01, 1.09}, {0.05, 1.45}, {0.25, 3.25}, {0.5, 5.5}, {0.75, 7.75}, {0.95, 9.55}, {0.99, 9.91}, {1, 10},
	} {
		if got := plan.Quantile(xs, c.p); !near(got, c.want, 1e-12) {
			t.Errorf("Quantile(1…10, %g) = %g, want %g", c.p, got, c.want)
		}
	}
	if got := plan.Quantile([]float64{7}, 0.99); got != 7 {
		t.Errorf("one value: %g", got)
	}
	if !math.IsNaN(plan.Quantile(nil, 0.5)) {
		t.Error("no values: want NaN")
	}
	s := plan.Summarize([]float64{4, 1, 3, 2})
	if s.N != 4 || s.Mean != 2.5 || !near(s.SD, math.Sqrt(5.0/3), 1e-15) || s.Quantiles[3] != 2.5 || len(s.Quantiles) != len(plan.QuantileProbs) {
		t.Errorf("Summarize: %+v", s)
	}
	if s := plan.Summarize([]float64{4}); !math.IsNaN(s.SD) || s.Mean != 4 {
		t.Errorf("one value: %+v, want SD NaN", s)
	}
}

// NIST/SEMATECH e-Handbook §1.3.5.9 (F-test for equality of two variances):
// for two samples of 240, the critical values at α = 0.05 are 0.7756 and
// 1.2894 (from memory): the two-sided p-value at those F is 0.05.
func TestFTest(t *testing.T) {
	for _, f := range []float64{0.7756, 1.2894} {
		if p := plan.FTest(math.Sqrt(f), 240, 1, 240); !near(p, 0.05, 0.0005) {
			t.Errorf("F = %g, 239 and 239 df: p = %.5f, want 0.05", f, p)
		}
	}
	if p := plan.FTest(1, 10, 1, 10); !near(p, 1, 1e-12) {
		t.Errorf("equal SDs: p = %g, want 1", p)
	}
	if p := plan.FTest(0, 10, 0, 10); !math.IsNaN(p) {
		t.Errorf("both SDs zero: %g, want NaN", p)
	}
}

// NIST/SEMATECH e-Handbook §1.3.5.3 (two-sample t-test), the AUTO83B data
// (from memory): US cars n = 249, mean 20.14458, SD 6.41470; Japanese cars
// n = 79, mean 30.48101, SD 6.10771; with unequal variances T = −12.62059 on
// 136.8750 df: the p-value is far below 0.001. At T = 1.9776 on 136.875 df
// (the two-sided 5 % point) p is 0.05.
func TestWelchT(t *testing.T) {
	if p := plan.WelchT(20.14458, 6.41470, 249, 30.48101, 6.10771, 79); p > 1e-20 {
		t.Errorf("AUTO83B: p = %g", p)
	}
	// Same variances and sizes: T = Δ/(s·√(2/n)); with n = 1000, s = 1 and
	// Δ = 1.961·√0.002 the df are 1998 and p ≈ 0.05.
	if p := plan.WelchT(1.961*math.Sqrt(0.002), 1, 1000, 0, 1, 1000); !near(p, 0.05, 0.0005) {
		t.Errorf("p = %g, want 0.05", p)
	}
}

func TestBinomial(t *testing.T) {
	// By hand: n = 10, p = ½, 2 successes: P(X ≤ 2) + P(X ≥ 8) = 2·(1 + 10 + 45)/1024.
	if p := plan.BinomialTest(2, 10, 0.5); !near(p, 112.0/1024, 1e-12) {
		t.Errorf("binomial test: %g, want %g", p, 112.0/1024)
	}
	if p := plan.BinomialTest(40, 40, 1); p != 1 {
		t.Errorf("all of all against 1: %g", p)
	}
	if p := plan.BinomialTest(39, 40, 1); p != 0 {
		t.Errorf("39 of 40 against 1: %g", p)
	}
	// Clopper–Pearson at the ends in closed form: none of n, upper
	// 1 − (α/2)^(1/n); all of n, lower (α/2)^(1/n).
	if ci := plan.ClopperPearson(0, 10, 0.95); ci[0] != 0 || !near(ci[1], 1-math.Pow(0.025, 0.1), 1e-9) {
		t.Errorf("0 of 10: %v", ci)
	}
	if ci := plan.ClopperPearson(10, 10, 0.95); ci[1] != 1 || !near(ci[0], math.Pow(0.025, 0.1), 1e-9) {
		t.Errorf("10 of 10: %v", ci)
	}
	// And the middle by its definition: at the lower end P(X ≥ k) = α/2, at
	// the upper end P(X ≤ k) = α/2.
	ci := plan.ClopperPearson(38, 40, 0.95)
	lo, hi := distuv.Binomial{N: 40, P: ci[0]}.Survival(37), distuv.Binomial{N: 40, P: ci[1]}.CDF(38)
	if !near(lo, 0.025, 1e-9) || !near(hi, 0.025, 1e-9) {
		t.Errorf("38 of 40: %v, tails at its ends %g %g", ci, lo, hi)
	}
}

func TestCompareSampleFindings(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	pred := exactly(normals(r, 20000, 0, 1), 0, 100e-6)
	shares := map[string]float64{"reference": 0.62, "feedback resistors": 0.21, "open-loop gain": 0.02}

	q := plan.CompareSample(plan.Sample{Name: "pre_offset", Unit: "V", Predicted: pred, Measured: normals(r, 400, 0, 100e-6)}, plan.Options{})
	if q.Verdict != plan.Agrees || !strings.HasPrefix(q.Finding, "The pre-trim offset agrees") {
		t.Errorf("same spread: %s: %s", q.Verdict, q.Finding)
	}

	q = plan.CompareSample(plan.Sample{Name: "pre_gain_error", Unit: "ratio", Predicted: pred, Measured: exactly(normals(r, 400, 0, 1), 0, 180e-6), Shares: shares}, plan.Options{})
	want := "Measured SD is 1.8× the predicted (F test p < 0.001): the budget underestimates what drives the pre-trim gain error (largest shares: reference 62 %, feedback resistors 21 %)"
	if q.Verdict != plan.Differs || !strings.HasPrefix(q.Finding, want) {
		t.Errorf("wider: %s: %s\nwant %s", q.Verdict, q.Finding, want)
	}
	if !near(q.SDRatio, 1.8, 0.15) || q.FP > 1e-6 || q.KSP > 0.01 {
		t.Errorf("wider: ratio %g, F p %g, KS p %g", q.SDRatio, q.FP, q.KSP)
	}

	q = plan.CompareSample(plan.Sample{Name: "post_offset", Unit: "V", Predicted: pred, Measured: exactly(normals(r, 400, 0, 1), 40e-6, 100e-6)}, plan.Options{})
	if q.Verdict != plan.Differs || !strings.Contains(q.Finding, "µV above the predicted (Welch p < 0.001): a systematic error in the offset after trim") {
		t.Errorf("shifted: %s: %s", q.Verdict, q.Finding)
	}

	// Four defective units among 400 widen the SD, not the middle half.
	outliers := append(exactly(normals(r, 396, 0, 1), 0, 100e-6), -3e-3, -2e-3, 2e-3, 3e-3)
	q = plan.CompareSample(plan.Sample{Name: "post_offset", Unit: "V", Predicted: pred, Measured: outliers}, plan.Options{})
	if q.Verdict != plan.Differs || !strings.Contains(q.Finding, "but the middle half agrees (IQR ratio 1") || !strings.Contains(q.Finding, "a few outlying units widen the offset after trim") {
		t.Errorf("outliers: %s (SD ratio %g, IQR ratio %g): %s", q.Verdict, q.SDRatio, q.IQRRatio, q.Finding)
	}

	q = plan.CompareSample(plan.Sample{Name: "offset_code", Unit: "code", Predicted: []float64{1, 2, 3}, Measured: []float64{2}}, plan.Options{})
	if q.Verdict != plan.NotCompared || !math.IsNaN(q.Measured.SD) || !math.IsNaN(q.FP) {
		t.Errorf("one measured value: %+v", q)
	}
}

func TestCompareProportion(t *testing.T) {
	p := plan.CompareProportion("yield", 0.995, 0.0005, 39, 40, plan.Options{})
	if p.Verdict != plan.Agrees || p.Measured != 0.975 || !near(p.P, 1-math.Pow(0.995, 40), 1e-3) {
		t.Errorf("39 of 40 against 99.5 %%: %+v", p)
	}
	p = plan.CompareProportion("yield", 0.995, 0.0005, 30, 40, plan.Options{})
	if p.Verdict != plan.Differs || !strings.Contains(p.Finding, "is below the predicted 99.5 %") {
		t.Errorf("30 of 40: %+v", p)
	}
	p = plan.CompareProportion("yield", math.NaN(), math.NaN(), 30, 40, plan.Options{})
	if p.Verdict != plan.NotCompared {
		t.Errorf("not predicted: %+v", p)
	}
}

// A Monte Carlo of 10⁶ trials against a thousand measured units.
func BenchmarkCompareSample(b *testing.B) {
	r := rand.New(rand.NewPCG(5, 6))
	s := plan.Sample{Name: "pre_offset", Unit: "V", Predicted: normals(r, 1_000_000, 0, 1e-3), Measured: normals(r, 1000, 0, 1e-3)}
	for b.Loop() {
		plan.CompareSample(s, plan.Options{})
	}
}

// Compare on a measurement made by hand: two units of two channels each, a
// quantity predicted in another unit, one measured and not predicted.
func TestCompareNotes(t *testing.T) {
	m := plan.Measurement{Product: "DUO-2", Units: 2, Passed: 1,
		Values: map[string][]float64{"pre_offset": {1e-3, 2e-3, 3e-3, 4e-3}, "pre_gain_error": {1e-4, 2e-4}, "gain_code": {2000, 2001}},
		Unit:   map[string]string{"pre_offset": "V", "pre_gain_error": "ratio", "gain_code": "code"}}
	p := plan.Prediction{Yield: math.NaN(), YieldSE: math.NaN(), Quantities: []plan.Predicted{
		{Name: "pre_offset", Unit: "V", Values: []float64{1e-3, 2e-3, 3e-3, 4e-3}},
		{Name: "pre_gain_error", Unit: "ppm", Values: []float64{100, 200}},
	}}
	c := plan.Compare(p, m, plan.Options{})
	if c.Product != "DUO-2" || len(c.Quantities) != 2 || c.Quantities[0].Verdict != plan.Agrees || c.Quantities[1].Verdict != plan.NotCompared {
		t.Errorf("quantities: %+v", c.Quantities)
	}
	if len(c.Proportions) != 1 || c.Proportions[0].Verdict != plan.NotCompared || c.Proportions[0].Count != 1 {
		t.Errorf("yield: %+v", c.Proportions)
	}
	notes := strings.Join(c.Notes, "\n")
	for _, want := range []string{
		"pre_gain_error is predicted in ppm but measured in ratio: not compared.",
		"gain_code was measured (2 values) but not predicted.",
		"pre_offset: 4 values from 2 units: every channel of a unit counts as one value.",
		"Only 2 units measured",
	} {
		if !strings.Contains(notes, want) {
			t.Errorf("notes lack %q:\n%s", want, notes)
		}
	}
}
