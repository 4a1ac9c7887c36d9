package budget_test

import (
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"trimline/instruments/budget"
)

// The resistor-ratio gain G = 1 + R2/R1 with uniform tolerances, hand-worked
// (common practice, the textbook comparison of worst case, RSS and Monte Carlo):
// R1 = 1 kΩ, R2 = 9 kΩ, each ±a, a = 0.1 %, rectangular; k = R2/R1 = 9, G = 10,
// g = G/10 − 1 = (1 + k·(1 + e2)/(1 + e1))/10 − 1 ≈ 0.9·(e2 − e1).
//
//	worst case: e2 = +a, e1 = −a: 0.9·(1.001/0.999 − 1) = +1801.8 ppm;
//	            e2 = −a, e1 = +a: 0.9·(0.999/1.001 − 1) = −1798.2 ppm.
//	RSS (GUM, independent): u = 0.9·√2·a/√3 = 734.8 ppm, 95 % ±1.96u = ±1440.3 ppm.
//	Monte Carlo: e2 − e1 is triangular on ±2a, so 0.9·(e2 − e1) is triangular on
//	  ±b, b = 1800 ppm; P(|g| > t) = (1 − t/b)² = 5 % gives t = b·(1 − √0.05) =
//	  1397.5 ppm: narrower than the RSS interval, far inside the worst case.
//	Matched pair, correlation ρ = 0.9 between r1 and r2 (as their values): the
//	  variance of e2 − e1 (of the log-ratio ln r2 − ln r1, to first order) is
//	  2(1 − ρ)σ², so u = 734.8·√(1 − 0.9) = 232.4 ppm, the spread shrinks by
//	  √0.1 = 0.316; the worst case does not (a correlation bounds no corner).
//
// The Monte Carlo half is sequencer/plan's TestResistorRatioMonteCarlo.
func TestResistorRatioWorstCaseRSS(t *testing.T) {
	const ppm = 1e-6
	b := load(t, "ratio-budget.yaml")
	s := b.Sources[0]
	check(t, "worst case high", s.High/ppm, 0.9*(1.001/0.999-1)/ppm, 1e-6)
	check(t, "worst case high (hand)", s.High/ppm, 1801.8, 0.05)
	check(t, "worst case low (hand)", s.Low/ppm, -1798.2, 0.05)
	p := b.Propagate()[1]
	uRSS := 0.9 * math.Sqrt2 * 0.001 / math.Sqrt(3)
	t.Logf("GUM: u = %.1f ppm, 95 %% [%.1f, %.1f] ppm, worst case [%.1f, %.1f] ppm",
		p.U/ppm, p.Interval95[0]/ppm, p.Interval95[1]/ppm, p.WorstCase[0]/ppm, p.WorstCase[1]/ppm)
	check(t, "RSS u (hand 734.8 ppm)", p.U/ppm, 734.8, 0.05)
	check(t, "RSS u", p.U, uRSS, 1e-6*uRSS)
	check(t, "RSS 95 % high (hand 1440.3 ppm)", p.Interval95[1]/ppm, 1440.3, 0.1)
	check(t, "worst case high through the fit", p.WorstCase[1]/ppm, 1801.8, 0.1)
	check(t, "worst case low through the fit", p.WorstCase[0]/ppm, -1798.2, 0.1)

	matched := load(t, "ratio-matched-budget.yaml")
	pm := matched.Propagate()[1]
	check(t, "matched RSS u (hand 232.4 ppm)", pm.U/ppm, 232.4, 0.05)
	check(t, "matched worst case high", pm.WorstCase[1]/ppm, 1801.8, 0.1)
}

// The open-loop gain relation: closed-loop G = A/(1 + A·β), β = 1/G_nominal, so
// the gain error is A·β/(1 + A·β) − 1 = −1/(1 + A·β) ≈ −G/A. A = 140 dB = 10⁷:
// G = 50 gives −4.99998 ppm (≈ −5 ppm), G = 10 gives −0.999999 ppm (≈ −1 ppm)
// (the numbers, common practice). A uniform in dB over 120…140 dB at G =
// 50: the ends are −49.9975 ppm (10⁶) and −5 ppm, and the mean ≈ −G·E[1/A] =
// −50·(10⁻⁶ − 10⁻⁷)/ln 10 = −19.54 ppm (hand-worked, E[10^(−d/20)] over d
// uniform on [120, 140] is (20/ln 10)·(10⁻⁶ − 10⁻⁷)/20).
func TestOpenLoopGain(t *testing.T) {
	const ppm = 1e-6
	parse := func(gain, loop string) *budget.Budget {
		t.Helper()
		b, err := budget.Parse("loop-budget.yaml", []byte(`budget: {product: LOOP}
transfer: {gain: `+gain+`, output_at_zero: 0 V, input: {low: -10 mV, high: 10 mV}}
sources:
  - {name: open-loop gain, acts: gain, open_loop: `+loop+`}
`))
		if err != nil {
			t.Fatal(err)
		}
		return b
	}
	for _, c := range []struct {
		gain string
		want float64 // ppm
	}{{"50", -5}, {"10", -1}, {"-50", -5}} {
		b := parse(c.gain, "{gain: 140 dB}")
		s := b.Sources[0]
		exact := -1 / (1 + 1e7/math.Abs(b.Transfer.Gain))
		check(t, "G = "+c.gain+": source value", s.Dist.Mean, exact, 1e-18)
		check(t, "G = "+c.gain+": ≈ −G/A in ppm", s.Dist.Mean/ppm, c.want, 0.0001)
		_, g := b.Nominal().PreTrim(b)
		check(t, "G = "+c.gain+": pre-trim gain error", g, exact, 1e-15)
		p := b.Propagate()[1]
		if p.U != 0 || p.Mean != g {
			t.Errorf("G = %s: a fixed open-loop gain has no spread: u %g, mean %g", c.gain, p.U, p.Mean)
		}
	}
	same := parse("50", "{gain: 1e7}")
	check(t, "1e7 V/V as 140 dB", same.Sources[0].Dist.Mean/ppm, -5, 0.0001)

	r := parse("50", "{low: 120 dB, high: 140 dB}")
	s := r.Sources[0]
	t.Logf("120…140 dB: mean %.4f ppm, σ %.4f ppm, [%.4f, %.4f] ppm", s.Dist.Mean/ppm, s.Dist.Sigma/ppm, s.Low/ppm, s.High/ppm)
	check(t, "low end (10⁶)", s.Low/ppm, -50/(1e6+50)/ppm, 1e-9)
	check(t, "high end (10⁷)", s.High/ppm, -50/(1e7+50)/ppm, 1e-9)
	check(t, "mean (hand −19.54 ppm)", s.Dist.Mean/ppm, -50*(1e-6-1e-7)/math.Ln10/ppm, 0.005)
	rng := rand.New(rand.NewPCG(5, 5))
	var sum float64
	const n = 200_000
	for range n {
		u := r.Draw(rng)
		if u.GainError < s.Low-1e-15 || u.GainError > s.High+1e-15 {
			t.Fatalf("drawn %g outside [%g, %g]", u.GainError, s.Low, s.High)
		}
		sum += u.GainError
	}
	check(t, "drawn mean", sum/n/ppm, s.Dist.Mean/ppm, 4*s.Dist.Sigma/ppm/math.Sqrt(n))
}

// A crossover step, hand-worked: G = 200, 11 points over ±10 mV, a step s in
// input-referred offset above 1 mV. Five points (2 … 10 mV) see G·s. The fit's
// slope is G·s·Σ(x over those)/Σx² = G·s·0.030/440·10⁻⁶ = G·s·68.18 V/V per V,
// so the gain error is 68.18·s (per volt of step); the offset at zero is
// G·s·5/11 − slope·x̄ = 200·s·5/11 = 90.91·s (x̄ = 0).
func TestCrossoverStepThroughTheFit(t *testing.T) {
	b, err := budget.Parse("x-budget.yaml", []byte(`budget: {product: X}
transfer: {gain: 200, output_at_zero: 2.5 V, input: {low: -10 mV, high: 10 mV}}
sources:
  - {name: crossover, acts: crossover_step, at: 1 mV, normal: 20 uV}
`))
	if err != nil {
		t.Fatal(err)
	}
	u := b.UnitOf([]float64{20e-6})
	check(t, "output below", u.Output(b, 0.001), 2.5+200*0.001, 1e-12)
	check(t, "output above", u.Output(b, 0.002), 2.5+200*(0.002+20e-6), 1e-12)
	o, g := u.PreTrim(b)
	check(t, "offset (hand 90.91·s)", o, 200*20e-6*5/11, 1e-12)
	check(t, "gain error (hand 68.18·s)", g, 20e-6*0.030/440e-6, 1e-12)
	p := b.Propagate()
	check(t, "sensitivity of the offset", p[0].Sensitivities["crossover"], 200*5.0/11, 1e-4)
	check(t, "sensitivity of the gain error", p[1].Sensitivities["crossover"], 0.030/440e-6, 1e-4)
}

// Offsets, gain error and the rails, hand-worked at G = 200, 2.5 V at zero:
// input offset 10 µV and output offset 1 mV give 2.5 + 0.002 + 0.001 V at zero;
// gain errors of +0.2 % and −0.1 % combine as 1.002·0.999 − 1 = +0.0998 %.
func TestUnitOutput(t *testing.T) {
	b, err := budget.Parse("u-budget.yaml", []byte(`budget: {product: U}
transfer:
  gain: 200 V/V
  output_at_zero: 2.5 V
  input: {low: -10 mV, high: 10 mV}
  rails: {low: 0.05 V, high: 4.95 V, knee: 0.1 V}
sources:
  - {name: ios, acts: input_offset, normal: 10 uV}
  - {name: oos, acts: output_offset, uniform: ±2 mV}
  - {name: g1, acts: gain, tolerance: ±0.2 %}
  - {name: g2, acts: gain, tolerance: ±0.2 %}
  - {name: rail, acts: rail_compression, uniform: ±1 %}
`))
	if err != nil {
		t.Fatal(err)
	}
	u := b.UnitOf([]float64{10e-6, 1e-3, 0.002, -0.001, 0.5})
	check(t, "gain error", u.GainError, 1.002*0.999-1, 1e-15)
	check(t, "output at zero", u.Output(b, 0), 2.5+200*1.000998*10e-6+1e-3, 1e-12)
	o, g := u.PreTrim(b)
	check(t, "pre-trim offset", o, 200*1.000998*10e-6+1e-3, 1e-12)
	check(t, "pre-trim gain error", g, 1.002*0.999-1, 1e-12)
	// Within the knee (edge at 4.85 V) with compression c = 0.5: e = 0.05 V past
	// the edge gives e − c·e²/(2k) = 0.05 − 0.5·0.0025/0.2 = 0.04375 V.
	lin := b.UnitOf([]float64{0, 0, 0, 0, 0.5})
	check(t, "in the knee", lin.Output(b, (4.90-2.5)/200), 4.85+0.04375, 1e-12)
	check(t, "held at the rail", lin.Output(b, 0.1), 4.95, 1e-12)
	check(t, "held at the low rail", lin.Output(b, -0.1), 0.05, 1e-12)
	check(t, "linear inside", lin.Output(b, 0.01), 4.5, 1e-12)
}

// Draw gives each source its distribution: σ of a uniform a/√3, triangular
// a/√6, arcsine a/√2 (the design's table, common practice), the stated
// correlation between two sources' values, and the same unit for the same
// generator state.
func TestDrawMarginalsAndCorrelation(t *testing.T) {
	b, err := budget.Load("testdata/example-budget.yaml")
	if err != nil {
		t.Fatal(err)
	}
	idx := map[string]int{}
	for i, s := range b.Sources {
		idx[s.Name] = i
	}
	const n = 200_000
	r := rand.New(rand.NewPCG(11, 12))
	vals := make([][]float64, len(b.Sources))
	for range n {
		u := b.Draw(r)
		for i, v := range u.Values {
			vals[i] = append(vals[i], v)
		}
	}
	for name, want := range map[string]float64{
		"input stage offset":   10e-6,
		"output stage offset":  2e-3 / math.Sqrt(3),
		"supply ripple pickup": 0.3e-3 / math.Sqrt(2),
		"layout thermocouples": 4e-6 / math.Sqrt(6),
		"reference":            0.002 / math.Sqrt(3),
		// drift: ±2 µV/°C rectangular times T − 23 °C, T uniform on 0…50 °C:
		// σ² = (a²/3)·((25 − 23)² + 50²/12) → σ = 16.83 µV.
		"offset drift": 2e-6 / math.Sqrt(3) * math.Sqrt(4+2500.0/12),
	} {
		_, sd := meanSD(vals[idx[name]])
		check(t, "σ of "+name+" (relative)", sd/want, 1, 0.01)
		check(t, "Dist.Sigma of "+name+" (relative)", b.Sources[idx[name]].Dist.Sigma/want, 1, 1e-9)
	}
	rho := corr(vals[idx["reference"]], vals[idx["output stage offset"]])
	t.Logf("drawn correlation of reference and output stage offset: %.4f (stated 0.3)", rho)
	check(t, "correlation of the values", rho, 0.3, 0.01)
	// Matched pair inside the ratio source: its gain error's σ is the first-order
	// k/(1+k)·σ_e·√(2(1 − ρ)), k = 199: 0.995·(0.001/√3)·√0.2.
	_, sd := meanSD(vals[idx["feedback resistors"]])
	check(t, "σ of the matched ratio (relative)", sd/(199.0/200*0.001/math.Sqrt(3)*math.Sqrt(0.2)), 1, 0.01)

	a := b.Draw(rand.New(rand.NewPCG(3, 4)))
	c := b.Draw(rand.New(rand.NewPCG(3, 4)))
	for i := range a.Values {
		if a.Values[i] != c.Values[i] {
			t.Fatalf("the same generator state drew different units: %v, %v", a.Values, c.Values)
		}
	}
}

// Correlations of values between unlike distributions are reached through
// their normal scores: a normal and a uniform source can correlate at most
// √(3/π) = 0.977 (common practice, the correlation of a normal with its own
// probability transform); 0.99 is refused, with the reachable range.
func TestCorrelationReach(t *testing.T) {
	text := func(rho string) string {
		return `budget: {product: C}
transfer: {gain: 1, output_at_zero: 0 V, input: {low: -1 V, high: 1 V}}
sources:
  - {name: a, acts: output_offset, normal: 1 mV}
  - {name: b, acts: output_offset, uniform: ±1 mV}
correlations:
  - {between: [a, b], coefficient: ` + rho + `}
`
	}
	_, err := budget.Parse("c-budget.yaml", []byte(text("0.99")))
	if err == nil || !strings.Contains(err.Error(), "c-budget.yaml:7:") || !strings.Contains(err.Error(), "to 0.977") {
		t.Errorf("0.99 between a normal and a uniform: %v", err)
	}
	b, err := budget.Parse("c-budget.yaml", []byte(text("0.95")))
	if err != nil {
		t.Fatal(err)
	}
	r := rand.New(rand.NewPCG(1, 1))
	var xa, xb []float64
	for range 200_000 {
		u := b.Draw(r)
		xa, xb = append(xa, u.Values[0]), append(xb, u.Values[1])
	}
	check(t, "drawn correlation normal–uniform", corr(xa, xb), 0.95, 0.005)
	// The GUM sees the stated correlation: u² = 1 + 1/3 + 2·0.95/√3 (mV²).
	p := b.Propagate()[0]
	check(t, "GUM u with the correlation (mV)", p.U*1e3, math.Sqrt(1+1.0/3+2*0.95/math.Sqrt(3)), 1e-6)
	sum := 0.0
	for _, s := range p.Shares {
		sum += s
	}
	check(t, "shares sum to 1", sum, 1, 1e-12)
}

func meanSD(v []float64) (float64, float64) {
	var s, ss float64
	for _, x := range v {
		s += x
	}
	m := s / float64(len(v))
	for _, x := range v {
		ss += (x - m) * (x - m)
	}
	return m, math.Sqrt(ss / float64(len(v)-1))
}

func corr(a, b []float64) float64 {
	ma, sa := meanSD(a)
	mb, sb := meanSD(b)
	var c float64
	for i := range a {
		c += (a[i] - ma) * (b[i] - mb)
	}
	return c / float64(len(a)-1) / (sa * sb)
}
