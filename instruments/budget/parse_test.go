package budget_test

import (
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"trimline/instruments/budget"
	"trimline/instruments/files"
)

func exampleText(t testing.TB) string {
	t.Helper()
	data, err := os.ReadFile("testdata/example-budget.yaml")
	if err != nil {
		t.Fatal(err)
	}
	return string(data)
}

// The example of the design parses into the values it writes, in SI.
func TestParseExample(t *testing.T) {
	b, err := budget.Load("testdata/example-budget.yaml")
	if err != nil {
		t.Fatal(err)
	}
	if b.Product != "BRX-200" || b.Revision != "C" || b.LimitsFile != filepath.Join("testdata", "brx200-limits.yaml") {
		t.Errorf("budget: %q %q %q", b.Product, b.Revision, b.LimitsFile)
	}
	tr := b.Transfer
	if tr.Gain != 200 || tr.OutputAtZero != 2.5 || tr.InputLow != -0.01 || tr.InputHigh != 0.01 || tr.Points != 11 ||
		tr.InputUnit != "V" || tr.OutputUnit != "V" || tr.Rails == nil || *tr.Rails != (budget.Rails{Low: 0.05, High: 4.95, Knee: 0.1}) {
		t.Errorf("transfer: %+v rails %+v", tr, tr.Rails)
	}
	if *b.Temperature != (budget.TempRange{Low: 0, High: 50, Reference: 23}) {
		t.Errorf("temperature: %+v", *b.Temperature)
	}
	want := []struct {
		name, acts, kind string
		mean, halfWidth  float64
	}{
		{"input stage offset", "input_offset", "normal", 0, 0},
		{"output stage offset", "output_offset", "uniform", 0, 2e-3},
		{"supply ripple pickup", "output_offset", "arcsine", 0, 0.3e-3},
		{"layout thermocouples", "input_offset", "triangular", 0, 4e-6},
		{"reference", "gain", "uniform", 0, 0.002},
		{"offset drift", "input_offset", "drift", 0, 2e-6 * 27},
		{"feedback resistors", "gain", "ratio", 0, 0},
		{"open-loop gain", "gain", "open_loop", -1 / (1 + 1e7/200.0), 0},
		{"rail-to-rail crossover", "crossover_step", "normal", 0, 0},
		{"output compression", "rail_compression", "uniform", 0, 0.005},
	}
	if len(b.Sources) != len(want) {
		t.Fatalf("%d sources", len(b.Sources))
	}
	for i, w := range want {
		s := b.Sources[i]
		if s.Name != w.name || s.Acts != w.acts || s.Dist.Kind != w.kind || math.Abs(s.Dist.Mean-w.mean) > 1e-18 ||
			w.halfWidth != 0 && math.Abs(s.Dist.HalfWidth-w.halfWidth) > 1e-15 {
			t.Errorf("source %d: %+v, want %+v", i, s, w)
		}
	}
	if s := b.Sources[0]; math.Abs(s.Dist.Sigma-10e-6) > 1e-20 || s.Line != 16 || s.Col != 5 {
		t.Errorf("input stage offset: σ %g at %d:%d", s.Dist.Sigma, s.Line, s.Col)
	}
	if r := b.Sources[6].Ratio; r == nil || r.R1 != (budget.Resistor{Value: 1000, Tolerance: 0.001}) || r.R2.Value != 199e3 || r.Correlation != 0.9 {
		t.Errorf("ratio: %+v", r)
	}
	if o := b.Sources[7].OpenLoop; o == nil || math.Abs(o.Low-1e7) > 1e-6 || o.High != o.Low || o.Beta != 1.0/200 {
		t.Errorf("open loop: %+v", o)
	}
	if b.Sources[8].At != 1e-3 {
		t.Errorf("crossover at %g", b.Sources[8].At)
	}
	if len(b.Correlations) != 1 || b.Correlations[0] != (budget.Correlation{A: 4, B: 1, Coefficient: 0.3}) {
		t.Errorf("correlations: %+v", b.Correlations)
	}
	d := b.Trim.DACs
	if len(d) != 2 || d[0].Name != "offset" || d[0].Adjusts != "offset" || d[0].Placement != "after_gain" || d[0].Bits != 12 ||
		math.Abs(d[0].LSB-12.2e-6) > 1e-20 || d[0].NoCorrection != 2048 || d[0].DNL != 0.3 ||
		d[1].Adjusts != "gain" || math.Abs(d[1].LSB-10e-6) > 1e-20 || d[1].Placement != "" {
		t.Errorf("dacs: %+v", d)
	}
}

// Every problem of a file comes back at once, each at file:line:col.
func TestParseErrors(t *testing.T) {
	base := exampleText(t)
	for _, c := range []struct {
		name      string
		old, new  string // the first line of the example holding old is replaced by new (lines; "" removes it)
		want      []string
		wantCount int // 0: len(want)
	}{
		{"unknown key", "  revision: C", "  revision: C\n  colour: blue",
			[]string{"b.yaml:5:3: unknown field \"colour\""}, 0},
		{"missing product", "  product: BRX-200", "",
			[]string{"b.yaml:2:1: missing required key \"product\""}, 0},
		{"wrong dimension", "normal: 10 uV", "    normal: 10 ms",
			[]string{"b.yaml:18:13: \"10 ms\" is a time (s): expected a voltage (V)"}, 0},
		{"ratio without unit", "tolerance: ±0.2 %", "    tolerance: ±0.2",
			[]string{"b.yaml:30:16: \"0.2\" has no unit"}, 0},
		{"no distribution", "normal: 10 uV", "",
			[]string{"b.yaml:16:5: source \"input stage offset\" has no distribution"}, 0},
		{"two distributions", "normal: 10 uV", "    normal: 10 uV\n    uniform: ±1 uV",
			[]string{"b.yaml:19:5: source \"input stage offset\" has two distributions (normal and uniform)"}, 0},
		{"unknown acts", "acts: input_offset             # input_offset", "    acts: sideways",
			[]string{"b.yaml:17:11: expected one of input_offset, output_offset, gain, crossover_step, rail_compression, found \"sideways\""}, 0},
		{"normal with ±", "normal: 10 uV", "    normal: ±10 uV",
			[]string{"b.yaml:18:13: a normal source takes its standard deviation σ without ±"}, 0},
		{"drift without range", "  temperature: {low: 0 °C, high: 50 °C, reference: 23 °C}", "",
			[]string{"b.yaml:32:12: a drift needs the operating range"}, 0},
		{"drift per second", "drift: ±2 uV/°C", "    drift: ±2 uV/s",
			[]string{"b.yaml:33:12: expected a coefficient per °C"}, 0},
		{"correlation out of range", "coefficient: 0.3", "    coefficient: 1.3",
			[]string{"b.yaml:53:18: expected a correlation coefficient from -1 to 1, found \"1.3\""}, 0},
		{"unknown source in correlation", "[reference, output stage offset]", "  - between: [reference, nobody]",
			[]string{"b.yaml:52:26: no source is named \"nobody\""}, 0},
		{"not positive semi-definite", "    coefficient: 0.3",
			"    coefficient: 0.9\n  - {between: [reference, supply ripple pickup], coefficient: 0.9}\n  - {between: [output stage offset, supply ripple pickup], coefficient: -0.9}",
			[]string{"b.yaml:52:3: the correlations between sources are inconsistent"}, 0},
		{"ratio correlated", "[reference, output stage offset]", "  - between: [reference, feedback resistors]",
			[]string{"b.yaml:52:26: source \"feedback resistors\" is a ratio"}, 0},
		{"resistor without ohms", "value: 1 kohm", "      r1: {value: 1 k, tolerance: ±0.1 %}",
			[]string{"b.yaml:37:19: unknown unit \"k\""}, 0},
		{"open loop in V", "open_loop: {gain: 140 dB}", "    open_loop: {gain: 140 V}",
			[]string{"b.yaml:42:23: expected an open-loop gain such as 140 dB"}, 0},
		{"crossover without at", "    at: 1 mV", "",
			[]string{"b.yaml:43:5: missing required key \"at\""}, 0},
		{"DAC too wide", "bits: 12", "      bits: 40",
			[]string{"b.yaml:59:13: expected 1 to 24 bits, found 40"}, 0},
		{"DAC LSB dimension", "lsb: 12.2 uV", "      lsb: 12.2 ppm",
			[]string{"b.yaml:60:12: \"12.2 ppm\" is a ratio (ppm or %): expected a voltage (V)"}, 0},
		{"placement", "placement: after_gain", "      placement: middle",
			[]string{"b.yaml:62:18: expected after_gain or before_gain, found \"middle\""}, 0},
		{"rails inverted", "rails: {low: 0.05 V", "  rails: {low: 4.95 V, high: 0.05 V, knee: 0.1 V}",
			[]string{"b.yaml:13:30: expected the high rail above the low one"}, 0},
		{"all at once", "  revision: C", "  revision: C\n  colour: blue",
			nil, 0},
		{"correlations beside a DAC mistake", "    coefficient: 0.3",
			"    coefficient: 0.9\n  - {between: [reference, supply ripple pickup], coefficient: 0.9}\n  - {between: [output stage offset, supply ripple pickup], coefficient: -0.9}",
			nil, 0},
	} {
		t.Run(c.name, func(t *testing.T) {
			text := replaceLine(t, base, c.old, c.new)
			if c.name == "correlations beside a DAC mistake" {
				text = replaceLine(t, text, "bits: 12", "      bits: 40")
				c.want = []string{"b.yaml:52:3: the correlations between sources are inconsistent", "b.yaml:61:13: expected 1 to 24 bits"}
			}
			if c.name == "all at once" {
				text = replaceLine(t, text, "normal: 10 uV", "    normal: 10 ms")
				text = replaceLine(t, text, "bits: 12", "      bits: 40")
				c.want = []string{"b.yaml:5:3: unknown field", "b.yaml:19:13: \"10 ms\"", "b.yaml:60:13: expected 1 to 24 bits"}
			}
			_, err := budget.Parse("b.yaml", []byte(text))
			errs := files.Errs(err)
			if err == nil || errs == nil {
				t.Fatalf("accepted (err %v)", err)
			}
			got := err.Error()
			for _, w := range c.want {
				if !strings.Contains(got, w) {
					t.Errorf("want %q in:\n%s", w, got)
				}
			}
			if n := max(c.wantCount, len(c.want)); len(errs) != n {
				t.Errorf("%d problems, want %d:\n%s", len(errs), n, got)
			}
			for _, e := range errs {
				if e.Line == 0 || e.Excerpt == "" {
					t.Errorf("problem without a position or excerpt: %v", e)
				}
			}
		})
	}
}

// replaceLine replaces the first line of text holding old by repl (lines
// without their final newline; "" removes the line).
func replaceLine(t *testing.T, text, old, repl string) string {
	t.Helper()
	lines := strings.Split(text, "\n")
	for i, l := range lines {
		if strings.Contains(l, old) {
			var out []string
			out = append(out, lines[:i]...)
			if repl != "" {
				out = append(out, strings.Split(repl, "\n")...)
			}
			return strings.Join(append(out, lines[i+1:]...), "\n")
		}
	}
	t.Fatalf("no line holds %q", old)
	return ""
}

// Not a budget at all: a YAML syntax error, and an empty file, say so.
func TestParseNotABudget(t *testing.T) {
	for _, text := range []string{"budget: [", "", "- 1\n- 2\n"} {
		if _, err := budget.Parse("x.yaml", []byte(text)); err == nil || !strings.HasPrefix(err.Error(), "x.yaml") {
			t.Errorf("%q: %v", text, err)
		}
	}
}

// FuzzParse: any bytes give a budget or an error, never a panic, and a budget
// that parses draws, propagates and fits finite numbers.
func FuzzParse(f *testing.F) {
	f.Add(exampleText(f))
	f.Add("budget: {product: X}\ntransfer: {gain: 1, output_at_zero: 0 V, input: {low: -1 V, high: 1 V}}\nsources:\n  - {name: a, acts: gain, normal: 1 %}\n")
	f.Add("budget: {product: X}\ntransfer: {gain: 1, output_at_zero: 0 V, input: {low: -1 V, high: 1 V}}\nsources:\n  - {name: a, acts: gain, open_loop: {low: 1 dB, high: 2 dB}}\n  - {name: b, acts: gain, uniform: ±1 %}\ncorrelations:\n  - {between: [a, b], coefficient: -1}\n")
	f.Fuzz(func(t *testing.T, text string) {
		b, err := budget.Parse("fuzz.yaml", []byte(text))
		if err != nil {
			return
		}
		for _, q := range b.Propagate() {
			if math.IsNaN(q.U) || math.IsInf(q.U, 0) {
				t.Fatalf("%s: u = %v", q.Name, q.U)
			}
		}
		r := rand.New(rand.NewPCG(1, 2))
		for range 10 {
			u := b.Draw(r)
			if len(u.Values) != len(b.Sources) {
				t.Fatalf("%d values for %d sources", len(u.Values), len(b.Sources))
			}
			u.PreTrim(b)
		}
	})
}
