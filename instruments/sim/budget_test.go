package sim_test

import (
	"fmt"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"trimline/instruments"
	"trimline/instruments/sim"
)

// testBudget is a budget of the demo card (gain 200, 2.5 V at zero input) whose
// sources are easy to recognise in the units drawn from it.
const testBudget = `budget:
  product: BRX-200
  revision: C
transfer:
  gain: 200
  output_at_zero: 2.5 V
  input: {low: -10 mV, high: 10 mV}
sources:
  - name: input offset
    acts: input_offset
    normal: 50 uV
  - name: output offset
    acts: output_offset
    uniform: ±1 mV
  - name: reference
    acts: gain
    tolerance: ±1 %
  - name: hand-over
    acts: crossover_step
    at: 2 mV
    normal: 10 uV
`

// writeBudget writes text to NAME in a new folder and returns the folder.
func writeBudget(t *testing.T, name, text string) string {
	t.Helper()
	dir := t.TempDir()
	if err := os.WriteFile(filepath.Join(dir, name), []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	return dir
}

// dutSpec is a sim://dut spec with settings, read from a station file in dir.
func dutSpec(dir string, settings map[string]string) instruments.Spec {
	return instruments.Spec{Role: "dut", Address: "sim://dut", Settings: settings, Dir: dir}
}

// budgetSettings parses the DUT settings of a spec the way the bench does, budget
// included: through a bench's DUT.
func budgetSettings(t *testing.T, spec instruments.Spec) sim.DUTSettings {
	t.Helper()
	b, err := sim.NewBench([]instruments.Spec{spec})
	if err != nil {
		t.Fatal(err)
	}
	return b.DUT().Settings()
}

// A relative budget path is resolved against the folder of the station file the
// spec came from (Spec.Dir); a missing file, a budget of another card and a
// setting the budget replaces are setting errors that say so.
func TestBudgetSetting(t *testing.T) {
	dir := writeBudget(t, "card-budget.yaml", testBudget)
	ok := dutSpec(dir, map[string]string{"budget": "card-budget.yaml"})
	if err := (sim.Driver{}).CheckSettings(ok); err != nil {
		t.Fatalf("budget beside the station file: %v", err)
	}
	abs := dutSpec("", map[string]string{"budget": filepath.Join(dir, "card-budget.yaml")})
	if err := (sim.Driver{}).CheckSettings(abs); err != nil {
		t.Fatalf("absolute budget path: %v", err)
	}
	for _, c := range []struct {
		name     string
		settings map[string]string
		budget   string // replaces testBudget when not empty
		want     []string
	}{
		{"missing file", map[string]string{"budget": "nowhere.yaml"}, "", []string{`"budget"`, "nowhere.yaml"}},
		{"empty path", map[string]string{"budget": " "}, "", []string{`"budget"`, "path of a budget file"}},
		{"other gain", map[string]string{"budget": "card-budget.yaml", "gain": "100"}, "", []string{"budget's gain is 200, the card's 100"}},
		{"other zero", map[string]string{"budget": "card-budget.yaml", "output_at_zero": "0 V"}, "", []string{"output at zero input is 2.5 V, the card's 0 V"}},
		{"current card", map[string]string{"budget": "card-budget.yaml", "output": "current", "gain": "200", "output_at_zero": "2.5 mA"}, "", []string{"output is in V, the card's in A"}},
		{"sigma beside", map[string]string{"budget": "card-budget.yaml", "offset_sigma": "1 mV"}, "", []string{`"offset_sigma"`, "remove offset_sigma or budget"}},
		{"open loop beside", map[string]string{"budget": "card-budget.yaml", "open_loop_gain": "1e6"}, "", []string{`"open_loop_gain"`}},
		{"two crossovers", map[string]string{"budget": "card-budget.yaml"},
			testBudget + "  - name: second hand-over\n    acts: crossover_step\n    at: 5 mV\n    normal: 1 uV\n",
			[]string{`"budget"`, "card-budget.yaml:", "crossover"}},
		{"compression", map[string]string{"budget": "card-budget.yaml"},
			strings.Replace(testBudget, "  input:", "  rails: {low: 0 V, high: 5 V, knee: 0.2 V}\n  input:", 1) +
				"  - name: squash\n    acts: rail_compression\n    uniform: ±0.5 %\n",
			[]string{`source "squash"`, "no per-unit rail compression"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			d := dir
			if c.budget != "" {
				d = writeBudget(t, "card-budget.yaml", c.budget)
			}
			err := (sim.Driver{}).CheckSettings(dutSpec(d, c.settings))
			if err == nil {
				t.Fatal("no error")
			}
			t.Log(err)
			for _, w := range c.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q does not say %q", err, w)
				}
			}
		})
	}
}

// A unit drawn from a budget is the same unit without it in everything the budget
// does not decide (its DACs, defect, supply current, drift), since the budget's
// draws come after all the others; what the budget decides is deterministic for the
// serial and seed and spread as the budget says.
func TestBudgetDrawsUnits(t *testing.T) {
	dir := writeBudget(t, "card-budget.yaml", testBudget)
	with := budgetSettings(t, dutSpec(dir, map[string]string{"budget": "card-budget.yaml"}))
	if with.Budget == nil {
		t.Fatal("no budget in the parsed settings")
	}
	without := sim.DefaultDUTSettings()
	const n = 4000
	var in, out, ge, step []float64
	for i := range n {
		serial := fmt.Sprintf("BRX-%05d", i+1)
		a, b := sim.Params(serial, 8, with), sim.Params(serial, 8, without)
		if !reflect.DeepEqual(a, sim.Params(serial, 8, with)) {
			t.Fatalf("%s: two draws from the budget differ", serial)
		}
		if a.OffsetDAC != b.OffsetDAC || a.GainDAC != b.GainDAC || a.Defect != b.Defect || a.SupplyCurrent != b.SupplyCurrent ||
			a.OffsetTC != b.OffsetTC || a.GainTC != b.GainTC || a.SensorOffset != b.SensorOffset || a.Noise != b.Noise {
			t.Fatalf("%s: the budget changed what it does not decide:\nwith    %+v\nwithout %+v", serial, a, b)
		}
		if a.OpenLoopGain != 0 || a.CrossoverAt != 2e-3 {
			t.Fatalf("%s: open-loop gain %g, crossover at %g: want ideal and the budget's 2 mV", serial, a.OpenLoopGain, a.CrossoverAt)
		}
		in, out, ge, step = append(in, a.InputOffset), append(out, a.OutputOffset), append(ge, a.GainError), append(step, a.CrossoverStep)
	}
	// σ of each from n draws agrees with the budget's within 4 standard
	// uncertainties σ/√(2(n − 1)) (the normal form; common practice). Uniform: σ =
	// a/√3 (GUM JCGM 100 §4.3.7).
	for _, c := range []struct {
		name string
		v    []float64
		sd   float64
	}{
		{"input offset", in, 50e-6},
		{"output offset", out, 1e-3 / math.Sqrt(3)},
		{"gain error", ge, 0.01 / math.Sqrt(3)},
		{"crossover step", step, 10e-6},
	} {
		var m, s float64
		for _, x := range c.v {
			m += x
		}
		m /= n
		for _, x := range c.v {
			s += (x - m) * (x - m)
		}
		s = math.Sqrt(s / (n - 1))
		u := c.sd / math.Sqrt(2*(n-1))
		t.Logf("%s: σ %.4g, budget %.4g (%+.2f u)", c.name, s, c.sd, (s-c.sd)/u)
		if math.Abs(s-c.sd) > 4*u {
			t.Errorf("%s: σ of %d units %.4g, the budget's %.4g", c.name, n, s, c.sd)
		}
	}
	// The overrides still win over the budget.
	fixed := budgetSettings(t, dutSpec(dir, map[string]string{"budget": "card-budget.yaml", "offset": "1 mV", "gain_error": "0.1 %"}))
	p := sim.Params("BRX-00001", 8, fixed)
	if p.InputOffset != 0 || p.OutputOffset != 1e-3 || p.GainError != 1e-3 {
		t.Errorf("overrides: input offset %g, output offset %g, gain error %g; want 0, 1 mV, 0.1 %%", p.InputOffset, p.OutputOffset, p.GainError)
	}
}
