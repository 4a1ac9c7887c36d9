package budget_test

import (
	"math"
	"strings"
	"testing"

	"trimline/instruments/budget"
	"trimline/instruments/files"
	"trimline/instruments/numfmt"
)

// coefBudget is a current-output budget trimmed by two firmware coefficients
// in their own formats, the offset's in mA (an LTX-420-like design).
const coefBudget = `budget: {product: COEF-1, revision: A}
transfer:
  gain: 0.016
  output_at_zero: 4 mA
  input: {low: 0 V, high: 1 V}
sources:
  - {name: offset, acts: output_offset, normal: 50 uA}
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

// Each coefficient keeps its own format and unit: Q2.14 for the gain (a plain
// factor), Q4.12 in mA for the offset, whose step is then 2^−12 mA.
func TestParseCoefficients(t *testing.T) {
	b, err := budget.Parse("c.yaml", []byte(coefBudget))
	if err != nil {
		t.Fatal(err)
	}
	cs := b.Trim.Coefficients
	if len(cs) != 2 || cs[0].Name != "gain" || cs[0].Adjusts != "gain" || cs[0].FormatName != "Q2.14" ||
		cs[0].Format.Kind != numfmt.Fixed || cs[0].Format.Frac != 14 || cs[0].UnitSI != 1 {
		t.Fatalf("coefficients %+v", cs)
	}
	o := cs[1]
	if o.Unit != "mA" || o.UnitSI != 1e-3 || o.Format.Int != 4 || o.Format.Frac != 12 {
		t.Fatalf("offset %+v", o)
	}
	if s := o.Step(0); s != math.Ldexp(1e-3, -12) {
		t.Errorf("offset step %g A, want 2^−12 mA", s)
	}
	// 1.3 steps rounds to 1 step; 9 mA lies beyond 7.99976 mA: held at the end, saturated.
	if v, sat := o.Hold(1.3 * math.Ldexp(1e-3, -12)); sat || math.Abs(v-math.Ldexp(1e-3, -12)) > 1e-18 {
		t.Errorf("hold 1.3 steps: %g %v", v, sat)
	}
	if v, sat := o.Hold(9e-3); !sat || math.Abs(v-(8-math.Ldexp(1, -12))*1e-3) > 1e-15 {
		t.Errorf("hold 9 mA: %g %v", v, sat)
	}
	// The value of one firmware unit may be written, as for a card that counts 312.5 µV.
	b, err = budget.Parse("c.yaml", []byte(strings.NewReplacer("0.016", "1", "4 mA", "0 V", "50 uA", "1 mV", "unit: mA", "unit: 312.5 uV", "format: Q4.12", "format: float32").Replace(coefBudget)))
	if err != nil {
		t.Fatal(err)
	}
	if o := b.Trim.Coefficients[1]; o.UnitSI != 312.5e-6 || o.Format.Kind != numfmt.Float32 {
		t.Errorf("offset %+v", o)
	}
}

// DAC coding: two's complement codes run −2^(bits−1) … 2^(bits−1) − 1 and no
// correction defaults to 0; binary offset (the default) 0 … 2^bits − 1.
func TestParseDACCoding(t *testing.T) {
	text := replaceLine(t, exampleText(t), "      no_correction: 2048", "      coding: twos_complement")
	b, err := budget.Parse("b.yaml", []byte(text))
	if err != nil {
		t.Fatal(err)
	}
	d := b.Trim.DACs[0]
	if !d.TwosComplement || d.NoCorrection != 0 || d.MinCode() != -2048 || d.MaxCode() != 2047 || d.MidCode() != 0 {
		t.Errorf("two's complement DAC %+v: codes %d … %d", d, d.MinCode(), d.MaxCode())
	}
	if g := b.Trim.DACs[1]; g.TwosComplement || g.MinCode() != 0 || g.MaxCode() != 4095 || g.MidCode() != 2048 {
		t.Errorf("binary-offset DAC %+v", g)
	}
}

// Mistakes in the coefficients and the coding, each at file:line:col, all at once.
func TestParseCoefficientErrors(t *testing.T) {
	for _, c := range []struct{ name, old, new, want string }{
		{"bad format", "format: Q4.12", "      format: Q4.x", "c.yaml:15:15: format \"Q4.x\": expected Q<m>.<n>"},
		{"scaled int", "format: Q4.12", "      format: int16", "c.yaml:15:15: format \"int16\": expected float32 or Q<m>.<n>"},
		{"no format", "format: Q4.12", "", "c.yaml:13:7: missing required key \"format\""},
		{"gain cannot hold 1", "format: Q2.14", "      format: Q1.15", "c.yaml:12:15: Q1.15 cannot hold 1"},
		{"unit on gain", "format: Q2.14", "      format: Q2.14\n      unit: mA", "c.yaml:13:13: unit applies to offset coefficients only"},
		{"unit of the wrong dimension", "unit: mA", "      unit: mV", "c.yaml:16:13: expected a unit of the output (current"},
		{"two offsets", "adjusts: gain", "      adjusts: offset", "c.yaml:14:16: coefficients[0] adjusts offset already"},
		{"unknown adjusts", "adjusts: gain", "      adjusts: zero", "c.yaml:11:16: expected gain or offset, found \"zero\""},
		{"unknown key", "format: Q2.14", "      format: Q2.14\n      text: hex", "c.yaml:13:7: unknown field \"text\""},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, err := budget.Parse("c.yaml", []byte(replaceLine(t, coefBudget, c.old, c.new)))
			if err == nil || files.Errs(err) == nil {
				t.Fatalf("accepted (err %v)", err)
			}
			if !strings.Contains(err.Error(), c.want) {
				t.Errorf("want %q in:\n%s", c.want, err)
			}
		})
	}
	// The earlier form, one format for both, says what to write instead.
	old := coefBudget[:strings.Index(coefBudget, "  coefficients:")] + "  coefficients: {format: fixed, fraction_bits: 14}\n"
	if _, err := budget.Parse("c.yaml", []byte(old)); err == nil || !strings.Contains(err.Error(), "c.yaml:9:26: expected a list of coefficients as a sequence writes them") {
		t.Errorf("old form: %v", err)
	}
	for _, c := range []struct{ name, new, want string }{
		{"coding", "      coding: gray", "b.yaml:61:15: expected binary_offset or twos_complement, found \"gray\""},
		{"no correction out of signed range", "      no_correction: 2048\n      coding: twos_complement", "b.yaml:61:22: expected a code in -2048..2047"},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, err := budget.Parse("b.yaml", []byte(replaceLine(t, exampleText(t), "      no_correction: 2048", c.new)))
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("want %q in:\n%v", c.want, err)
			}
		})
	}
}
