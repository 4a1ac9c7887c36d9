package plan

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"trimline/instruments/budget"
	"trimline/instruments/numfmt"
	"trimline/limits"
	"trimline/sequencer"
)

// q is the upper tail of the standard normal distribution, 1 − Φ(x).
func q(x float64) float64 { return 0.5 * math.Erfc(x/math.Sqrt2) }

// writeBudget writes a budget file and, when lims is not empty, the limit file
// it names, in a folder of their own, and loads the budget.
func writeBudget(t *testing.T, body, lims string) *budget.Budget {
	t.Helper()
	dir := t.TempDir()
	head := "budget:\n  product: PLAN-1\n  revision: A\n"
	if lims != "" {
		head += "  limits: plan-limits.yaml\n"
		lf := "limit_set: {name: plan test, revision: \"1\", product: PLAN-1}\nlimits:\n" + lims
		if err := os.WriteFile(filepath.Join(dir, "plan-limits.yaml"), []byte(lf), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	p := filepath.Join(dir, "plan-budget.yaml")
	if err := os.WriteFile(p, []byte(head+body), 0o644); err != nil {
		t.Fatal(err)
	}
	b, err := budget.Load(p)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// transfer is a unity-gain card swept ±1 V about 2.5 V.
const transfer = `transfer:
  gain: 1
  output_at_zero: 2.5 V
  input: {low: -1 V, high: 1 V}
`

// offsetLimits bound post_offset to ±50 µV and leave the gain wide.
const offsetLimits = `  - name: offset after trim
    description: offset
    unit: uV
    uses: [post_offset]
    tolerance: {lower: -50, upper: 50}
  - name: gain after trim
    description: gain
    unit: ppm
    uses: [post_gain_error]
    tolerance: {lower: -1000, upper: 1000}
  - name: linearity after trim
    description: linearity
    unit: "%"
    uses: [post_nonlinearity]
    tolerance: {upper: 0.01}
`

func run(t *testing.T, b *budget.Budget, o Options) *Report {
	t.Helper()
	if b.LimitsFile != "" && o.Tolerances == nil {
		tol, err := LoadTolerances(b.LimitsFile)
		if err != nil {
			t.Fatal(err)
		}
		o.Tolerances = tol
	}
	r, err := Run(context.Background(), b, o)
	if err != nil {
		t.Fatal(err)
	}
	return r
}

// The planner's codes are the station's: for units drawn at random, the codes
// and the predicted transfer of sequencer.ComputeTrim (pivot at the output at
// zero, every DAC at no correction when measured) equal the planner's without
// DNL, for a design with a gain DAC, an offset DAC before the gain stage and a
// fine one after it.
func TestCodesAreTheStations(t *testing.T) {
	dacs := []budget.DAC{
		{Name: "fine", Adjusts: "offset", Placement: "after_gain", Bits: 8, LSB: 20e-6, NoCorrection: 128},
		{Name: "gain", Adjusts: "gain", Bits: 12, LSB: 10e-6, NoCorrection: 2048},
		{Name: "coarse", Adjusts: "offset", Placement: "before_gain", Bits: 10, LSB: 0.5e-6, NoCorrection: 512},
	}
	const G, Y0 = 200, 2.5
	d := newDesign(budget.Trim{DACs: dacs}, G, Y0)
	st := sequencer.TrimPlan{Pivot: Y0}
	for _, x := range dacs {
		st.DACs = append(st.DACs, sequencer.DAC{Name: x.Name, Adjusts: x.Adjusts, Bits: x.Bits, LSB: x.LSB,
			NoCorrection: x.NoCorrection, BeforeGain: x.Placement == "before_gain"})
	}
	before := []int{128, 2048, 512}
	r := rand.New(rand.NewPCG(1, 2))
	out := after{Steps: make([]step, len(dacs))}
	for i := range 2000 {
		off, ge := r.NormFloat64()*20e-3, r.NormFloat64()*0.01
		if i%50 == 0 {
			off *= 20 // some saturate
		}
		d.solve(off, ge, nil, how{clamp: true}, &out)
		s, err := sequencer.ComputeTrim(st, G*(1+ge), Y0+off, before, G, Y0)
		if err != nil {
			t.Fatal(err)
		}
		for k, c := range s.Codes {
			if c.Code != out.Steps[k].Code || c.Saturated != out.Steps[k].Saturated || math.Abs(c.Ideal-out.Steps[k].Ideal) > 1e-6 {
				t.Fatalf("unit %d (offset %g V, gain error %g) DAC %s: station %+v, planner %+v", i, off, ge, dacs[k].Name, c, out.Steps[k])
			}
		}
		if math.Abs(s.PredIntercept-Y0-out.Offset) > 1e-12 || math.Abs(s.PredSlope/G-1-out.GainError) > 1e-12 {
			t.Fatalf("unit %d: station leaves %g V, %g; planner %g V, %g", i, s.PredIntercept-Y0, s.PredSlope/G-1, out.Offset, out.GainError)
		}
	}
}

// The ½ LSB rule (common practice): a unit whose offset is spread over many
// codes and never saturates the DAC is left with a rounding error uniform over
// ±½ LSB, standard deviation LSB/√12; the plan's common-practice interval is
// ±1.96 of that.
func TestQuantisationResidualIsLSBOverRoot12(t *testing.T) {
	b := writeBudget(t, transfer+`sources:
  - name: output offset
    acts: output_offset
    normal: 1 mV
trim:
  dacs:
    - {name: offset, adjusts: offset, bits: 16, lsb: 10 uV, no_correction: 32768}
`, "")
	r := run(t, b, Options{Seed: 3})
	post := r.Post[0]
	want := 10e-6 / math.Sqrt(12) // 2.887 µV
	// The sd of M uniform values has a relative standard error of about
	// √((κ − 1)/(4M)) = 0.45/√M (κ = 1.8 for a uniform distribution).
	if rel := math.Abs(post.SD/want - 1); rel > 5*0.45/math.Sqrt(float64(r.Trials)) {
		t.Errorf("post_offset sd %.4g V over %d units, LSB/√12 = %.4g V (%.2g %% off)", post.SD, r.Trials, want, 100*rel)
	}
	if post.GUM95 == nil || math.Abs(post.GUM95[1]-1.96*want) > 1e-15 || !strings.Contains(post.GUMBasis, "common practice") {
		t.Errorf("common-practice interval %v (%s), want ±%.4g", post.GUM95, post.GUMBasis, 1.96*want)
	}
	if math.Abs(post.Interval95[1]-0.95*5e-6) > 0.05e-6 || math.Abs(post.Interval95[0]+0.95*5e-6) > 0.05e-6 {
		t.Errorf("95 %% interval %v, want ±0.95·½ LSB = ±4.75 µV for a uniform residual", post.Interval95)
	}
	if r.DACs[0].Saturation != 0 || post.Shares[PartQuantisation] != 1 {
		t.Errorf("saturation %g, shares %v: want none and all quantisation", r.DACs[0].Saturation, post.Shares)
	}
}

// The fraction of units that saturate a DAC, for a pre-trim offset normal with
// σ: the code asked for is N − v/LSB, rounded; it falls outside 0 … 2N − 1 when
// v > (N + ½)·LSB or v < −(N − ½)·LSB, so the fraction is
// Q((N + ½)·LSB/σ) + Q((N − ½)·LSB/σ), Q the upper tail of the normal
// distribution (NIST/SEMATECH e-Handbook §1.3.6.6.1, the normal distribution's
// cumulative distribution function). 6 bits, LSB 50 µV, σ 1 mV: Q(1.625) +
// Q(1.575) = 0.0521 + 0.0576 = 0.110.
func TestSaturationFollowsTheNormalCDF(t *testing.T) {
	b := writeBudget(t, transfer+`sources:
  - name: output offset
    acts: output_offset
    normal: 1 mV
trim:
  dacs:
    - {name: offset, adjusts: offset, bits: 6, lsb: 50 uV, no_correction: 32}
`, "")
	r := run(t, b, Options{Seed: 5})
	want := q(32.5*0.05) + q(31.5*0.05)
	got := r.DACs[0]
	if se := YieldSE(want, r.Trials); math.Abs(got.Saturation-want) > 4*se {
		t.Errorf("saturation %.4f ± %.4f over %d units, normal CDF gives %.4f", got.Saturation, se, r.Trials, want)
	}
	if math.Abs(got.SaturationSE-YieldSE(got.Saturation, r.Trials)) > 1e-15 {
		t.Errorf("saturation SE %g", got.SaturationSE)
	}
	// What a saturated DAC cannot take shows as the saturation part.
	if s := r.Post[0].Shares[PartSaturation]; !(s > 0.9) {
		t.Errorf("post_offset shares %v: saturation should dominate", r.Post[0].Shares)
	}
}

// The standard error of a binomial proportion, √(p(1 − p)/M) (NIST/SEMATECH
// e-Handbook §7.2.4): 99.5 % over 10 000 units is 0.0705 %.
func TestYieldSE(t *testing.T) {
	for _, c := range []struct {
		p    float64
		m    int
		want float64
	}{{0.995, 10000, 7.0534e-4}, {0.5, 100, 0.05}, {1, 1000, 0}, {0, 1000, 0}} {
		if got := YieldSE(c.p, c.m); math.Abs(got-c.want) > 1e-7 {
			t.Errorf("YieldSE(%g, %d) = %g, want %g", c.p, c.m, got, c.want)
		}
	}
	if !math.IsNaN(YieldSE(0.5, 0)) {
		t.Error("YieldSE of no trials should be NaN")
	}
}

// The recommendation, worked by hand. The offset at the output is normal with
// σ = 1 mV; the tolerance after trim is ±50 µV; one offset DAC after the gain,
// no DNL, no-correction code N = 2^(bits−1). A unit with offset v gets the code
// N − round(v/LSB) clamped to 0 … 2N − 1 and is left with
//
//	v − round(v/LSB)·LSB  (|·| ≤ ½ LSB)  inside the range,
//	v − N·LSB  or  v + (N − 1)·LSB        at either end.
//
// Rounding passes every unit iff ½ LSB ≤ 50 µV: LSB ≤ 100 µV. With that, a unit
// passes iff −(N − 1)·LSB − 50 µV ≤ v ≤ N·LSB + 50 µV, so it fails with
// probability Q((N·LSB + 0.05 mV)/σ) + Q(((N − 1)·LSB + 0.05 mV)/σ). The target
// 99.5 % wants that ≤ 0.005, about both ends at 2.81σ.
//
//   - 5 bits (N = 16) at the largest LSB, 100 µV: Q(1.65) + Q(1.55) =
//     0.049 + 0.061 = 11 % fail. No 5-bit DAC will do.
//   - 6 bits (N = 32) at 100 µV: Q(3.25) + Q(3.15) = 0.14 % fail, so 6 bits do.
//     The smallest LSB solves Q(32·L + 0.05) + Q(31·L + 0.05) = 0.005 (L in mV):
//     31.5·L + 0.05 ≈ 2.807 (both tails together at 0.5 %) gives L ≈ 87.5 µV;
//     bisection on the formula (below) gives 87.61 µV, a range of
//     64·L = 5.61 mV.
//
// So: 6 bits, LSB 87.6 µV, range 5.61 mV. The Monte Carlo finds the LSB where
// its own count of failures crosses 0.5 %; with 100 000 units that fraction
// has a standard error of √(0.005·0.995/100 000) = 0.022 %, and the failure
// rate falls by (32·φ(2.85) + 31·φ(2.77))/σ = 0.049 % per µV of LSB, so its LSB
// is within about 0.46 µV (one standard error) of the formula's; the test
// allows 2 µV.
func TestRecommendationWorkedByHand(t *testing.T) {
	b := writeBudget(t, transfer+`sources:
  - name: output offset
    acts: output_offset
    normal: 1 mV
trim:
  dacs:
    - {name: offset, adjusts: offset, bits: 12, lsb: 12.2 uV, no_correction: 2048}
`, offsetLimits)
	r := run(t, b, Options{Seed: 7, TargetYield: 0.995})
	if len(r.Recommendations) != 1 {
		t.Fatalf("recommendations %+v", r.Recommendations)
	}
	rec := r.Recommendations[0]
	fail := func(l float64) float64 { return q(32*l+0.05) + q(31*l+0.05) } // l in mV, σ = 1 mV
	lo, hi := 0.05, 0.1
	for range 60 {
		if mid := (lo + hi) / 2; fail(mid) > 0.005 {
			lo = mid
		} else {
			hi = mid
		}
	}
	wantLSB := hi * 1e-3 // V
	if math.Abs(wantLSB-87.61e-6) > 0.01e-6 {
		t.Fatalf("the formula's LSB is %.5g V, the comment worked out 87.61 µV", wantLSB)
	}
	if !rec.Found || rec.Bits != 6 || rec.NoCorrection != 32 || math.Abs(rec.LSB-wantLSB) > 2e-6 {
		t.Fatalf("recommended %+v, want 6 bits, LSB %.4g V", rec, wantLSB)
	}
	if math.Abs(rec.Range-64*rec.LSB) > 1e-15 || rec.Pass < 0.995 || rec.Result != sequencer.ResPostOffset {
		t.Errorf("recommended %+v", rec)
	}
	// The design as given (12 bits of 12.2 µV: ±25 mV of range, ½ LSB = 6.1 µV)
	// passes every unit; the gain is not trimmed and has no error.
	if r.Yield != 1 || r.YieldSE != 0 || r.OffsetPass != 1 || r.GainPass != 1 {
		t.Errorf("yield %g ± %g (offset %g, gain %g), want 1", r.Yield, r.YieldSE, r.OffsetPass, r.GainPass)
	}
	if len(r.Tolerances.NotPredicted) != 1 || r.Tolerances.NotPredicted[0] != "linearity after trim" {
		t.Errorf("not predicted %v", r.Tolerances.NotPredicted)
	}
}

// Firmware coefficients held in fixed point Qm.n: the gain coefficient
// k = 1/(1 + ge) is rounded to a multiple of 2^−n, which leaves a gain error
// uniform over ±2^−(n+1), standard deviation 2^−n/√12 (common practice); float32
// keeps 24 significant bits.
func TestCoefficientRounding(t *testing.T) {
	q2, _ := numfmt.Parse("Q2.16", "decimal")
	f32, _ := numfmt.Parse("float32", "decimal")
	if got := (budget.Coefficient{Format: q2, UnitSI: 1}).Round(1 + 3.4/65536); got != 1+3.0/65536 {
		t.Errorf("fixed rounding %v", got)
	}
	if got := (budget.Coefficient{Format: f32, UnitSI: 1}).Round(1 + 1e-9); got != 1 {
		t.Errorf("float32 rounding %v", got)
	}
	b := writeBudget(t, transfer+`sources:
  - name: reference
    acts: gain
    tolerance: ±1 %
trim:
  coefficients:
    - {name: gain, adjusts: gain, format: Q2.16}
    - {name: offset, adjusts: offset, format: Q4.16}
`, "")
	r := run(t, b, Options{Seed: 11})
	want := math.Ldexp(1, -16) / math.Sqrt(12)
	post := r.Post[1]
	if rel := math.Abs(post.SD/want - 1); rel > 0.02 {
		t.Errorf("post_gain_error sd %.4g, 2^−16/√12 = %.4g", post.SD, want)
	}
	// The offset after correction, k·Y0 + m − Y0 with no offset before it,
	// carries the gain coefficient's rounding times Y0 = 2.5 V and the offset
	// coefficient's own: u = √(2.5² + 1)·2^−16/√12 V, as the common-practice
	// interval says.
	wantOff := math.Hypot(2.5, 1) * math.Ldexp(1, -16) / math.Sqrt(12)
	if off := r.Post[0]; math.Abs(off.SD/wantOff-1) > 0.03 || off.GUM95 == nil || math.Abs(off.GUM95[1]/(1.96*wantOff)-1) > 1e-9 {
		t.Errorf("post_offset sd %.4g, interval %v; √(2.5² + 1)·2^−16/√12 = %.4g", off.SD, off.GUM95, wantOff)
	}
	if post.Shares[PartCoefficient] != 1 || len(r.DACs) != 0 || len(r.Coefficients) != 2 {
		t.Errorf("shares %v, DACs %d", post.Shares, len(r.DACs))
	}
}

// An LTX-420-like design: a current output (Y0 = 0 here, so that only the
// offset coefficient's rounding is left in the offset), the gain held as
// Q2.14 and the offset as Q4.12 in mA, so that one step of the offset is
// 2^−12 mA = 0.244 µA and the residual u = 2^−12 mA/√12 ≈ 0.0705 µA (common
// practice: rounding uniform over ±½ step). An offset of σ 10 mA saturates the
// Q4.12 range −8 … 7.99976 mA in P(|Z| > 0.8) = 2·Φ(−0.8) = 0.4237 of units
// (normal table).
func TestCoefficientsOwnFormatAndUnit(t *testing.T) {
	const head = `transfer:
  gain: 0.016
  output_at_zero: 0 A
  input: {low: 0 V, high: 1 V}
sources:
  - name: output offset
    acts: output_offset
    normal: %s
  - name: reference
    acts: gain
    tolerance: ±0.5 %%
trim:
  coefficients:
    - name: gain
      adjusts: gain
      format: Q2.14
    - name: offset
      adjusts: offset
      format: Q4.12
      unit: mA
`
	b := writeBudget(t, fmt.Sprintf(head, "50 uA"), "")
	r := run(t, b, Options{Seed: 5})
	want := math.Ldexp(1e-3, -12) / math.Sqrt(12)
	if math.Abs(want-0.0705e-6) > 0.0001e-6 {
		t.Fatalf("hand-worked u %.6g", want)
	}
	off := r.Post[0]
	if math.Abs(off.SD/want-1) > 0.03 || off.GUM95 == nil || math.Abs(off.GUM95[1]/(1.96*want)-1) > 1e-9 {
		t.Errorf("post_offset sd %.4g A, interval %v; 2^−12 mA/√12 = %.4g A", off.SD, off.GUM95, want)
	}
	if g := r.Post[1]; math.Abs(g.SD/(math.Ldexp(1, -14)/math.Sqrt(12))-1) > 0.03 {
		t.Errorf("post_gain_error sd %.4g, 2^−14/√12", g.SD)
	}
	if len(r.Coefficients) != 2 || r.Coefficients[1].Saturation != 0 {
		t.Errorf("coefficients %+v", r.Coefficients)
	}

	b = writeBudget(t, fmt.Sprintf(head, "10 mA"), "")
	r = run(t, b, Options{Seed: 5})
	c := r.Coefficients[1]
	if c.Coefficient.Name != "offset" || math.Abs(c.Saturation-0.4237) > 3*c.SaturationSE+0.001 {
		t.Errorf("offset coefficient saturation %.4f ± %.4f, want 2·Φ(−0.8) = 0.4237", c.Saturation, c.SaturationSE)
	}
	// A saturated offset coefficient leaves at least |offset| − 8 mA.
	if hi := r.Post[0].Interval95; hi[1] < 1e-3 {
		t.Errorf("post_offset interval %v: saturation should leave mA", hi)
	}
}

// A two's-complement offset DAC: codes −128 … 127 about 0 (no correction).
// With an offset of σ 100 LSB the codes centre on 0 and the DAC saturates
// where |offset| > 127.5 LSB below or 128.5 LSB above (codes round away from
// the ends): P(Z < −1.275) + P(Z > 1.285) = 0.1011 + 0.0994 = 0.2005 (normal table).
func TestTwosComplementDAC(t *testing.T) {
	b := writeBudget(t, transfer+`sources:
  - name: output offset
    acts: output_offset
    normal: 1 mV
trim:
  dacs:
    - name: offset
      adjusts: offset
      bits: 8
      lsb: 10 uV
      coding: twos_complement
`, "")
	if x := b.Trim.DACs[0]; x.NoCorrection != 0 || x.MinCode() != -128 || x.MaxCode() != 127 {
		t.Fatalf("DAC %+v", x)
	}
	r := run(t, b, Options{Seed: 3})
	codes := r.Codes[0]
	if math.Abs(codes.Mean) > 3*codes.SD/math.Sqrt(float64(r.Trials)) || codes.Interval95[0] < -128 || codes.Interval95[1] > 127 {
		t.Errorf("codes mean %.3g, interval %v: want centred on 0 within −128 … 127", codes.Mean, codes.Interval95)
	}
	d := r.DACs[0]
	if math.Abs(d.Saturation-0.2005) > 3*d.SaturationSE+0.002 {
		t.Errorf("saturation %.4f ± %.4f, want 0.2005", d.Saturation, d.SaturationSE)
	}
	// The same DAC written as offset binary about 128 (the analog DAC sees the
	// register with its top bit inverted), with DNL: the same residuals on the
	// same units, codes 128 apart.
	withDNL := strings.Replace(transfer+`sources:
  - name: output offset
    acts: output_offset
    normal: 1 mV
trim:
  dacs:
    - name: offset
      adjusts: offset
      bits: 8
      lsb: 10 uV
      dnl: 0.3 LSB
      coding: twos_complement
`, "normal: 1 mV", "normal: 0.5 mV", 1)
	rt := run(t, writeBudget(t, withDNL, ""), Options{Seed: 3})
	rb := run(t, writeBudget(t, strings.Replace(withDNL, "coding: twos_complement", "no_correction: 128", 1), ""), Options{Seed: 3})
	if rt.Post[0].SD != rb.Post[0].SD || math.Abs(rt.Codes[0].Mean+128-rb.Codes[0].Mean) > 1e-9 || rt.DACs[0].Saturation != rb.DACs[0].Saturation {
		t.Errorf("two's complement: post sd %g, code mean %g; offset binary about 128: %g, %g",
			rt.Post[0].SD, rt.Codes[0].Mean, rb.Post[0].SD, rb.Codes[0].Mean)
	}
	dsg, s := newDesign(b.Trim, 1, 2.5), &after{Steps: make([]step, 1)}
	for _, c := range []struct {
		off  float64
		code int
		sat  bool
	}{{-2e-3, 127, true}, {2e-3, -128, true}, {0.5e-3, -50, false}} {
		dsg.solve(c.off, 0, nil, how{clamp: true}, s)
		if s.Steps[0].Code != c.code || s.Steps[0].Saturated != c.sat {
			t.Errorf("offset %g V: %+v, want code %d saturated %v", c.off, s.Steps[0], c.code, c.sat)
		}
	}
}

// bitError: the correction of code c from n is off by the sum of the bit
// errors where they differ, + where c has the bit, − where n has it.
func TestBitError(t *testing.T) {
	e := []float32{0.5, -0.25, 1, 2}
	for _, c := range []struct {
		c, n int
		want float64
	}{{8, 8, 0}, {9, 8, 0.5}, {7, 8, 0.5 - 0.25 + 1 - 2}, {0, 8, -2}, {12, 8, 1}} {
		if got := bitError(c.c, c.n, e); math.Abs(got-c.want) > 1e-9 {
			t.Errorf("bitError(%d, %d) = %g, want %g", c.c, c.n, got, c.want)
		}
	}
}

// DNL: with every bit weight off by a normal error of σ dnl LSB, a code that
// differs from the no-correction code in k bits is off by dnl·√k LSB. With the
// offset near zero the codes asked for are mid-scale ± 30, half of them below
// 2048 = 100000000000b and so differing from it in most of the 12 bits: DNL
// takes the larger part of the residual's variance, the rounding the rest.
func TestDNLAddsToTheResidual(t *testing.T) {
	b := writeBudget(t, transfer+`sources:
  - name: output offset
    acts: output_offset
    normal: 100 uV
trim:
  dacs:
    - {name: offset, adjusts: offset, bits: 12, lsb: 10 uV, no_correction: 2048, dnl: 0.5 LSB}
`, "")
	r := run(t, b, Options{Seed: 13})
	post := r.Post[0]
	if post.Shares[PartDNL] < 0.5 || post.Shares[PartQuantisation] < 0.02 {
		t.Errorf("shares %v: DNL and quantisation should both count", post.Shares)
	}
	if !(post.SD > 10e-6/math.Sqrt(12)*1.2) {
		t.Errorf("post_offset sd %g: DNL should widen it beyond LSB/√12", post.SD)
	}
}

// The limit file's bounds on the predicted results, read from the demo card's.
func TestTolerancesOfTheDemoCard(t *testing.T) {
	tol, err := LoadTolerances(filepath.Join("..", "..", "sequences", "brx200-limits.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(tol.Offset.Lo+800e-6) > 1e-12 || math.Abs(tol.Offset.Hi-800e-6) > 1e-12 ||
		math.Abs(tol.Gain.Lo+500e-6) > 1e-12 || math.Abs(tol.Gain.Hi-500e-6) > 1e-12 {
		t.Errorf("bands %+v %+v", tol.Offset, tol.Gain)
	}
	if tol.Offset.Unit != "uV" || len(tol.NotPredicted) == 0 {
		t.Errorf("tolerances %+v", tol)
	}
	if !tol.Judge(0, 0) || tol.Judge(801e-6, 0) || tol.Judge(0, -501e-6) {
		t.Error("Judge")
	}
}

// The same seed gives the same plan.
func TestSameSeedSamePlan(t *testing.T) {
	b := writeBudget(t, transfer+`sources:
  - name: output offset
    acts: output_offset
    uniform: ±1 mV
trim:
  dacs:
    - {name: offset, adjusts: offset, bits: 8, lsb: 10 uV, no_correction: 128, dnl: 0.2 LSB}
`, offsetLimits)
	o := Options{Seed: 21, TargetYield: 0.99, MinTrials: 20000, SearchTrials: 20000}
	a, c := run(t, b, o), run(t, b, o)
	if a.Yield != c.Yield || a.Post[0].SD != c.Post[0].SD || a.Recommendations[0] != c.Recommendations[0] {
		t.Errorf("two runs differ: %v %v, %+v %+v", a.Yield, c.Yield, a.Recommendations[0], c.Recommendations[0])
	}
}

// A budget without a trim design (one only the simulator draws from) is
// planned too: the units leave as they came, and there is nothing to size.
func TestNoTrimDesign(t *testing.T) {
	b := writeBudget(t, transfer+`sources:
  - name: output offset
    acts: output_offset
    uniform: ±40 uV
`, offsetLimits)
	r := run(t, b, Options{Seed: 1, TargetYield: 0.995, MinTrials: 20000})
	if r.Post[0].SD != r.Pre[0].SD || r.Post[0].Shares[PartUntrimmed] != 1 || len(r.Recommendations) != 0 || len(r.Notes) == 0 {
		t.Errorf("post %+v, recommendations %v, notes %v", r.Post[0], r.Recommendations, r.Notes)
	}
	// Uniform over ±40 µV inside ±50 µV: every unit passes.
	if r.Yield != 1 {
		t.Errorf("yield %g", r.Yield)
	}
}

// Bounds on the predicted results come from toleranced limits and from
// expressions that read as bounds, several on one result intersected; an
// expression that does not read as bounds is named, and limits on other
// results are listed as not predicted.
func TestTolerancesOf(t *testing.T) {
	set, err := limits.Load("l.yaml", []byte(`limit_set: {name: t, revision: "1", product: P}
limits:
  - {name: offset wide, description: a, unit: uV, uses: [post_offset], tolerance: {lower: -100, upper: 80}}
  - {name: offset tight, description: b, unit: mV, uses: [post_offset], expr: "abs(post_offset) <= 0.06"}
  - {name: gain low, description: c, unit: ppm, uses: [post_gain_error], expr: "post_gain_error >= -300"}
  - {name: both, description: d, unit: ppm, uses: [post_gain_error, pre_gain_error], expr: "abs(post_gain_error) < abs(pre_gain_error)"}
  - {name: linearity, description: e, unit: "%", uses: [post_nonlinearity], tolerance: {upper: 0.01}}
`), sequencer.FirstLayoutCatalog())
	if err != nil {
		t.Fatal(err)
	}
	tol := TolerancesOf(set)
	if math.Abs(tol.Offset.Lo+60e-6) > 1e-12 || math.Abs(tol.Offset.Hi-60e-6) > 1e-12 || len(tol.Offset.Limits) != 2 || tol.Offset.Unit != "uV" {
		t.Errorf("offset band %+v", tol.Offset)
	}
	if math.Abs(tol.Gain.Lo+300e-6) > 1e-12 || !math.IsInf(tol.Gain.Hi, 1) || !tol.Gain.Bounded() || !tol.Gain.Pass(1) {
		t.Errorf("gain band %+v", tol.Gain)
	}
	if strings.Join(tol.ExpressionOnly, ",") != "both" || strings.Join(tol.NotPredicted, ",") != "linearity" {
		t.Errorf("expression only %v, not predicted %v", tol.ExpressionOnly, tol.NotPredicted)
	}
}
