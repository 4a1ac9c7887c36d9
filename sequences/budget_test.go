package sequences_test

import (
	"context"
	"fmt"
	"io/fs"
	"maps"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/goccy/go-yaml"

	"trimline/instruments"
	"trimline/instruments/budget"
	"trimline/instruments/sim"
	"trimline/instruments/units"
	"trimline/sequencer"
	"trimline/sequencer/fit"
	"trimline/sequencer/plan"
	"trimline/sequencer/uncertainty"
	"trimline/sequences"
)

// The standard uncertainty of a standard deviation s from n values of a normal
// distribution is s/√(2(n − 1)) (the large-n form of the chi-square interval of
// NIST/SEMATECH e-Handbook of Statistical Methods §1.3.5.8, "Chi-Square Test for
// the Standard Deviation"; common practice). A measured and a predicted σ agree
// when they differ by at most agreeK of their combined standard uncertainties.
// For the flatter-than-normal sources some budgets hold (uniform, arcsine) the
// normal form overstates the uncertainty a little, so the check is if anything
// looser there.
const agreeK = 3

// sdUnc returns the standard uncertainty of a standard deviation sd from n values.
func sdUnc(sd float64, n int) float64 { return sd / math.Sqrt(2*float64(n-1)) }

// moments returns the mean and sample standard deviation of v.
func moments(v []float64) (mean, sd float64) {
	for _, x := range v {
		mean += x
	}
	mean /= float64(len(v))
	for _, x := range v {
		sd += (x - mean) * (x - mean)
	}
	return mean, math.Sqrt(sd / float64(len(v)-1))
}

// prediction is a budget's σ of one pre-trim quantity and its standard uncertainty
// (0 for the law of propagation, which has none from sampling).
type prediction struct {
	how   string
	sd, u float64
}

// predict returns the budget's σ of pre_offset and pre_gain_error by the law of
// propagation (JCGM 100, Propagate) and by the adaptive Monte Carlo of JCGM
// 101:2008 §7.9 (plan.Simulate: units drawn from the budget and fitted), in that order.
func predict(t *testing.T, b *budget.Budget) (offset, gain []prediction) {
	t.Helper()
	for _, p := range b.Propagate() {
		switch p.Name {
		case budget.PreOffset:
			offset = append(offset, prediction{"law of propagation", p.U, 0})
		case budget.PreGainError:
			gain = append(gain, prediction{"law of propagation", p.U, 0})
		}
	}
	if len(offset) != 1 || len(gain) != 1 {
		t.Fatalf("%s: Propagate gives no %s or %s", b.Path, budget.PreOffset, budget.PreGainError)
	}
	mc, err := plan.Simulate(b, uncertainty.MCOptions{P: 0.95, Seed: 19})
	if err != nil {
		t.Fatal(err)
	}
	how := fmt.Sprintf("adaptive Monte Carlo, %d trials", mc.Trials)
	so, sg := mc.Summary(0).Std, mc.Summary(1).Std
	offset = append(offset, prediction{how, so, sdUnc(so, mc.Trials)})
	gain = append(gain, prediction{how, sg, sdUnc(sg, mc.Trials)})
	return offset, gain
}

// agree checks the measured σ of n values against each prediction and logs both.
func agree(t *testing.T, what, unit string, scale, measured float64, n int, preds []prediction) {
	t.Helper()
	um := sdUnc(measured, n)
	for _, p := range preds {
		u := math.Hypot(um, p.u)
		t.Logf("%s: measured σ %.4g %s (u %.2g, n %d), predicted %.4g %s (u %.2g, %s): %+.2f u",
			what, measured*scale, unit, um*scale, n, p.sd*scale, unit, p.u*scale, p.how, (measured-p.sd)/u)
		if math.Abs(measured-p.sd) > agreeK*u {
			t.Errorf("%s: measured σ %.4g %s over %d units, the budget predicts %.4g %s (%s): %.1f combined standard uncertainties apart, more than %d",
				what, measured*scale, unit, n, p.sd*scale, unit, p.how, math.Abs(measured-p.sd)/u, agreeK)
		}
	}
}

// demoStation parses a demo product's station file and returns it with the role of
// its simulated DUT.
func demoStation(t *testing.T, p sequences.Product) (*sequencer.Station, string) {
	t.Helper()
	data, err := fs.ReadFile(sequences.Demo, p.Station)
	if err != nil {
		t.Fatal(err)
	}
	st, err := sequencer.ParseStation(p.Station, data)
	if err != nil {
		t.Fatal(err)
	}
	for role, in := range st.Instruments {
		if in.Address == "sim://dut" {
			return st, role
		}
	}
	t.Fatalf("%s: no sim://dut", p.Station)
	return nil, ""
}

// firstSweep returns the from, to and points of the first sweep step of a demo
// sequence: the as-found sweep the pre-trim fit is made on.
func firstSweep(t *testing.T, name string) (from, to float64, points int) {
	t.Helper()
	data, err := fs.ReadFile(sequences.Demo, name)
	if err != nil {
		t.Fatal(err)
	}
	var f struct {
		Steps []struct {
			Kind, From, To string
			Points         int
		}
	}
	if err := yaml.Unmarshal(data, &f); err != nil {
		t.Fatal(err)
	}
	for _, s := range f.Steps {
		if s.Kind != "sweep" {
			continue
		}
		lo, err1 := units.Parse(s.From)
		hi, err2 := units.Parse(s.To)
		if err1 != nil || err2 != nil {
			t.Fatalf("%s: sweep from %q to %q", name, s.From, s.To)
		}
		return lo.Value, hi.Value, s.Points
	}
	t.Fatalf("%s: no sweep", name)
	return
}

// budgetOf loads a demo product's budget file from the embedded files.
func budgetOf(t *testing.T, p sequences.Product) *budget.Budget {
	t.Helper()
	name := strings.TrimSuffix(p.Sequence, "-sequence.yaml") + "-budget.yaml"
	data, err := fs.ReadFile(sequences.Demo, name)
	if err != nil {
		t.Fatalf("%s ships no budget file: %v", p.Name, err)
	}
	b, err := budget.Parse(name, data)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// preTrim fits the line the station fits (sequencer/fit, first order) to a unit's
// settled, noiseless output before trim at the budget's sweep points, and returns
// its offset (output at zero input less the nominal) and gain error.
func preTrim(t *testing.T, p sim.UnitParams, b *budget.Budget) (offset, gainError float64) {
	t.Helper()
	tr := b.Transfer
	x, y := make([]float64, tr.Points), make([]float64, tr.Points)
	for i := range x {
		x[i] = tr.InputLow + (tr.InputHigh-tr.InputLow)*float64(i)/float64(tr.Points-1)
		y[i] = p.Output(x[i], p.OffsetDAC.NoCorrection(), p.GainDAC.NoCorrection())
	}
	r, err := fit.Poly(x, y, 1, 0)
	if err != nil {
		t.Fatal(err)
	}
	return r.Coef[0] - tr.OutputAtZero, r.Coef[1]/tr.Gain - 1
}

// Every demo product ships a budget file beside its other files: it names the
// product and its limit file, describes the sweep its sequence fits and the card its
// station simulates, and predicts the σ of the pre-trim offset and gain error of the
// simulated population (the good units of the first 5000 serials, every channel,
// drawn as the demo station draws them and fitted as the station fits them).
func TestDemoBudgetsFitTheirPopulation(t *testing.T) {
	ps, err := sequences.Products()
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	if err := os.CopyFS(dir, sequences.Demo); err != nil {
		t.Fatal(err)
	}
	for _, p := range ps {
		t.Run(p.Name, func(t *testing.T) {
			b := budgetOf(t, p)
			if b.Product != p.Name || filepath.Base(b.LimitsFile) != p.Limits {
				t.Errorf("budget of %s names product %q and limit file %q, want %q and %q", p.Name, b.Product, b.LimitsFile, p.Name, p.Limits)
			}
			lo, hi, n := firstSweep(t, p.Sequence)
			if tr := b.Transfer; tr.InputLow != lo || tr.InputHigh != hi || tr.Points != n {
				t.Errorf("budget sweeps %g..%g in %d points, the sequence %g..%g in %d", tr.InputLow, tr.InputHigh, tr.Points, lo, hi, n)
			}
			st, role := demoStation(t, p)
			set := st.Instruments[role].Settings
			// The budget describes the card the station simulates: the driver takes it
			// in place of the settings it replaces.
			withBudget := maps.Clone(set)
			for _, k := range []string{"offset_sigma", "gain_sigma", "open_loop_gain", "crossover_step", "crossover_at"} {
				delete(withBudget, k)
			}
			withBudget["budget"] = strings.TrimSuffix(p.Sequence, "-sequence.yaml") + "-budget.yaml"
			if err := (sim.Driver{}).CheckSettings(instruments.Spec{Role: role, Kind: instruments.KindPort, Address: "sim://dut", Settings: withBudget, Dir: dir}); err != nil {
				t.Errorf("the station's DUT settings with the budget: %v", err)
			}

			s, err := sim.ParseDUTSettings(set)
			if err != nil {
				t.Fatal(err)
			}
			seed, _ := strconv.ParseUint(set["seed"], 10, 64)
			channels := max(s.Channels, 1)
			var ofs, ge []float64
			for i := 1; i <= 5000; i++ {
				for k := 1; k <= channels; k++ {
					u := sim.ChannelParams(p.Serial(i), k, seed, s)
					if u.Defect != sim.DefectNone {
						continue // the ~2 % defective units are not the budget's population
					}
					o, g := preTrim(t, u, b)
					ofs, ge = append(ofs, o), append(ge, g)
				}
			}
			_, so := moments(ofs)
			_, sg := moments(ge)
			po, pg := predict(t, b)
			ou := "mV"
			if b.Transfer.OutputUnit == "A" {
				ou = "µA"
				agree(t, "pre-trim offset", ou, 1e6, so, len(ofs), po)
			} else {
				agree(t, "pre-trim offset", ou, 1e3, so, len(ofs), po)
			}
			agree(t, "pre-trim gain error", "ppm", 1e6, sg, len(ge), pg)
		})
	}
}

// preTrimLimits judges only the pre-trim results: the engine runs the demo
// sequence up to its trim step.
const preTrimLimits = `limit_set:
  name: pre-trim only
  revision: "1"
  product: BRX-200
decision:
  coverage: 95.45 %
  rule: simple
limits:
  - name: untrimmed offset in range
    description: Best-fit-line offset before trim.
    unit: mV
    uses: [pre_offset]
    tolerance: {lower: -20, upper: 20}
  - name: untrimmed gain in range
    description: Gain error before trim.
    unit: "%"
    uses: [pre_gain_error]
    tolerance: {lower: -1.8, upper: 1.8}
`

// runPreTrim runs serials 1..n of the BRX-200 through the demo sequence up to its
// trim step (identify, clear trim, station zero, the pre-trim sweep and its fit) on
// the station st, on the simulated bench and its simulated clock, and returns the
// measured pre-trim offset and gain error of the units the simulator made without a
// defect (settings s, seed) and how many units it left out.
func runPreTrim(t *testing.T, st *sequencer.Station, s sim.DUTSettings, seed uint64, n int) (ofs, ge []float64, defective int) {
	t.Helper()
	p, err := sequences.Find("BRX-200")
	if err != nil {
		t.Fatal(err)
	}
	data, err := fs.ReadFile(sequences.Demo, p.Sequence)
	if err != nil {
		t.Fatal(err)
	}
	src := string(data)
	cut := strings.Index(src, "\n  - kind: trim ")
	if cut < 0 {
		t.Fatal("the demo sequence has no trim step")
	}
	seq, err := sequencer.ParseSequence(p.Sequence, []byte(src[:cut+1]), func(string) ([]byte, error) { return []byte(preTrimLimits), nil })
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	e, err := sequencer.Open(ctx, sequencer.Config{Station: st, Sequence: seq, NewID: func(time.Time) string { return "budget-test" }})
	if err != nil {
		t.Fatal(err)
	}
	defer e.Close()
	for i := 1; i <= n; i++ {
		serial := p.Serial(i)
		if sim.Params(serial, seed, s).Defect != sim.DefectNone {
			defective++ // the ~2 % defective units are not the budget's population
			continue
		}
		rec := e.Run(ctx, serial)
		o, ok1 := rec.Result(sequencer.ResPreOffset)
		g, ok2 := rec.Result(sequencer.ResPreGainError)
		if !ok1 || !ok2 {
			t.Fatalf("%s: no pre-trim offset or gain error (%s)", serial, rec.Verdict)
		}
		ofs, ge = append(ofs, o), append(ge, g)
	}
	return ofs, ge, defective
}

// The check: a budget that matches the demo card's simulated population
// (sequences/brx200-budget.yaml) predicts the σ of the pre-trim offset and gain
// error the demo station measures over 1000 simulated BRX-200 units (seed 8, the
// demo's; the units the simulator made with a defect, about 2 %, left out: a stuck
// DAC bit or an open output is not a spread the budget describes) within agreeK
// combined standard uncertainties of the two σ.
func TestBudgetPredictsDemoPretrimSpread(t *testing.T) {
	if testing.Short() {
		t.Skip("runs 1000 units through the engine (about 10 s)")
	}
	p, err := sequences.Find("BRX-200")
	if err != nil {
		t.Fatal(err)
	}
	st, role := demoStation(t, p)
	s, err := sim.ParseDUTSettings(st.Instruments[role].Settings)
	if err != nil {
		t.Fatal(err)
	}
	ofs, ge, defective := runPreTrim(t, st, s, 8, 1000)
	t.Logf("%d units measured, %d defective left out", len(ofs), defective)
	// What the simulator drew for these very units, before any measurement: the
	// measured σ differs from the population's by the sampling of 1000 units, which
	// is what the criterion allows for.
	var drawn []float64
	for i := 1; i <= 1000; i++ {
		if u := sim.Params(p.Serial(i), 8, s); u.Defect == sim.DefectNone {
			drawn = append(drawn, u.GainError)
		}
	}
	_, sd := moments(drawn)
	t.Logf("σ of the gain errors the simulator drew for them: %.4g ppm (population: %.4g ppm)", sd*1e6, s.GainSigma*1e6)
	b := budgetOf(t, p)
	po, pg := predict(t, b)
	_, so := moments(ofs)
	_, sg := moments(ge)
	agree(t, "pre-trim offset", "mV", 1e3, so, len(ofs), po)
	agree(t, "pre-trim gain error", "ppm", 1e6, sg, len(ge), pg)
}

// optInBudget is a budget unlike the demo card's default population (σ 3 mV and
// 0.4 %): bounded and derived sources, a correlation and a larger input-pair step,
// so the spread the station measures can only have come from it.
const optInBudget = `budget:
  product: BRX-200
  revision: C
transfer:
  gain: 200
  output_at_zero: 2.5 V
  input: {low: -10 mV, high: 10 mV}
  points: 11
sources:
  - name: input offset
    acts: input_offset
    uniform: ±5 uV
  - name: output offset
    acts: output_offset
    arcsine: ±1 mV
  - name: thermocouples
    acts: input_offset
    triangular: ±2 uV
  - name: reference
    acts: gain
    tolerance: ±0.2 %
  - name: gain resistors
    acts: gain
    ratio:
      r1: {value: 1 kohm, tolerance: ±0.1 %}
      r2: {value: 199 kohm, tolerance: ±0.1 %}
      correlation: 0.5
  - name: open-loop gain
    acts: gain
    open_loop: {low: 120 dB, high: 140 dB}
  - name: input-pair hand-over
    acts: crossover_step
    at: 1 mV
    normal: 5 uV
correlations:
  - between: [input offset, output offset]
    coefficient: 0.5
`

// The opt-in path: a station whose simulated DUT names a budget file (budget:,
// relative to the station file) makes units whose pre-trim σ of offset and gain
// error, measured by the engine over 600 units, is the budget's, not the default
// population's.
func TestStationBudgetDrawsUnits(t *testing.T) {
	if testing.Short() {
		t.Skip("runs 600 units through the engine (about 6 s)")
	}
	dir := t.TempDir()
	data, err := fs.ReadFile(sequences.Demo, "brx200-station.yaml")
	if err != nil {
		t.Fatal(err)
	}
	src := string(data)
	seedLine := "      seed: \"8\""
	if !strings.Contains(src, seedLine) {
		t.Fatal("the demo station has no DUT seed line")
	}
	src = strings.Replace(src, seedLine, seedLine+"\n      budget: budgets/opt-in.yaml", 1)
	path := filepath.Join(dir, "station.yaml")
	os.MkdirAll(filepath.Join(dir, "budgets"), 0o755)
	for name, text := range map[string]string{path: src, filepath.Join(dir, "budgets", "opt-in.yaml"): optInBudget} {
		if err := os.WriteFile(name, []byte(text), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	st, err := sequencer.LoadStation(path)
	if err != nil {
		t.Fatal(err)
	}
	set := maps.Clone(st.Instruments["dut"].Settings)
	delete(set, "budget") // which units are defective does not depend on it
	s, err := sim.ParseDUTSettings(set)
	if err != nil {
		t.Fatal(err)
	}
	ofs, ge, defective := runPreTrim(t, st, s, 8, 600)
	t.Logf("%d units measured, %d defective left out", len(ofs), defective)
	b, err := budget.Parse("opt-in.yaml", []byte(optInBudget))
	if err != nil {
		t.Fatal(err)
	}
	po, pg := predict(t, b)
	_, so := moments(ofs)
	_, sg := moments(ge)
	agree(t, "pre-trim offset", "mV", 1e3, so, len(ofs), po)
	agree(t, "pre-trim gain error", "ppm", 1e6, sg, len(ge), pg)
	if so > 1.5e-3 || sg > 0.2e-2 {
		t.Errorf("measured σ %.3g mV and %.3g %%: the default population's (3 mV, 0.4 %%), not the budget's", so*1e3, sg*1e2)
	}
}
