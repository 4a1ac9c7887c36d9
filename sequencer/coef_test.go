package sequencer_test

// Firmware correction coefficients: the coefficients: section, the coefficients
// step, and clear_trim and store on coefficients, against a DUT port that keeps
// coefficient registers (coefDriver, below).

import (
	"context"
	"errors"
	"fmt"
	"math"
	"net/url"
	"strings"
	"sync"
	"testing"
	"time"

	"trimline/instruments"
	"trimline/instruments/sim"
	"trimline/sequencer"
)

// coefSeq has a Q2.14 hex gain coefficient and an int16 offset coefficient of
// 10 µV a count held in mV, written after a fit of the uncorrected unit.
const coefSeq = `sequence:
  product: BRX-200
  revision: C
  maker: Fenwright Labs
limits: brx200-limits.yaml
ideal: {gain: 200, offset: 2.5 V, full_scale: 4 V}
meter: {range: 10 V, nplc: 1}
coefficients:
  - name: gain
    adjusts: gain
    format: Q2.14
    text: hex
    write: "CAL GAIN {value}"
    read: "CAL GAIN?"
  - name: offset
    adjusts: offset
    format: int16
    scale: 10 uV
    unit: mV
    write: "CAL OFS {value}"
    read: "CAL OFS?"
steps:
  - kind: clear_trim
    name: clear trim
  - kind: sweep
    name: raw
    from: -10 mV
    to: 10 mV
    points: 5
    settle: 20 ms
    readings: 4
  - kind: fit
    name: raw fit
    sweep: raw
    results: {offset: raw_offset}
  - kind: coefficients
    name: correct
    fit: raw fit
    results: {gain: coef_gain, offset: coef_offset}
  - kind: store
    command: "NV STORE"
`

const coefLimits = `  - name: raw offset in range
    description: Output error at zero input before correction.
    unit: mV
    uses: [raw_offset]
    tolerance: {lower: -50, upper: 50}
`

// coefPort is the state of the coefficient registers of the DUT port coefDriver
// opened last, and what the test makes it do.
var coefPort = struct {
	sync.Mutex
	regs    map[string]string // register ("GAIN", "OFS") → text it holds
	writes  []string          // every CAL write, in order
	skew    map[string]string // register → reply to its read instead of what it holds
	errOn   string            // a CAL write starting with this fails at the port
	errRead string            // a read of this register answers "ERR bad register"
}{}

// resetCoefPort empties the registers to what a unit leaves assembly with.
func resetCoefPort() {
	coefPort.Lock()
	defer coefPort.Unlock()
	coefPort.regs = map[string]string{"GAIN": "4100", "OFS": "250"}
	coefPort.writes, coefPort.skew, coefPort.errOn, coefPort.errRead = nil, nil, "", ""
}

// coefDriver opens a simulated bench (coefport://source etc.) whose DUT port also
// answers CAL GAIN / CAL OFS writes and reads from registers of its own; the
// simulated output does not apply them (the tests check what is written).
type coefDriver struct{}

func (coefDriver) Open(context.Context, *url.URL, instruments.Spec) (instruments.Instrument, error) {
	return nil, errors.New("coefport: open as a group")
}

func (coefDriver) OpenGroup(ctx context.Context, specs []instruments.Spec) ([]instruments.Instrument, error) {
	simSpecs := make([]instruments.Spec, len(specs))
	for i, s := range specs {
		s.Address = strings.Replace(s.Address, "coefport://", "sim://", 1)
		simSpecs[i] = s
	}
	b, err := sim.NewBench(simSpecs)
	if err != nil {
		return nil, err
	}
	out := make([]instruments.Instrument, len(specs))
	for i, s := range specs {
		switch s.Role {
		case "source":
			out[i] = b.Source()
		case "meter":
			out[i] = b.Meter()
		case "dut":
			out[i] = &coefDUT{DUT: b.DUT()}
		}
	}
	return out, nil
}

func init() { instruments.Register("coefport", coefDriver{}) }

type coefDUT struct{ *sim.DUT }

func (d *coefDUT) Command(ctx context.Context, line string) error {
	reg, text, ok := strings.Cut(strings.TrimPrefix(line, "CAL "), " ")
	if !strings.HasPrefix(line, "CAL ") || !ok {
		return d.DUT.Command(ctx, line)
	}
	coefPort.Lock()
	defer coefPort.Unlock()
	if coefPort.errOn != "" && strings.HasPrefix(line, coefPort.errOn) {
		return errors.New("dut replied ERR locked")
	}
	coefPort.writes = append(coefPort.writes, line)
	coefPort.regs[reg] = text
	return nil
}

func (d *coefDUT) Query(ctx context.Context, line string) (string, error) {
	reg, ok := strings.CutSuffix(strings.TrimPrefix(line, "CAL "), "?")
	if !strings.HasPrefix(line, "CAL ") || !ok {
		return d.DUT.Query(ctx, line)
	}
	coefPort.Lock()
	defer coefPort.Unlock()
	if reg == coefPort.errRead {
		return "ERR bad register", nil
	}
	if r, ok := coefPort.skew[reg]; ok && len(coefPort.writes) > 2 { // after clear_trim's two writes
		return r, nil
	}
	return coefPort.regs[reg], nil
}

// coefBench loads seq with the coefficient limits on the demo station, its
// instruments on coefDriver, every unit free of defects.
func coefBench(t *testing.T, seq string) (*sequencer.Engine, sequencer.Config) {
	t.Helper()
	resetCoefPort()
	b := kindsBench{seq: seq, lim: withLimits(t, coefLimits), set: map[string]map[string]string{"dut": {"defect_rate": "0"}}}
	cfg := b.config(t)
	for role, in := range cfg.Station.Instruments {
		in.Address = strings.Replace(in.Address, "sim://", "coefport://", 1)
		cfg.Station.Instruments[role] = in
	}
	e, err := sequencer.Open(context.Background(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { e.Close() })
	return e, cfg
}

func coefWrites(rec *sequencer.Record, step string) []sequencer.CoefficientWrite {
	var out []sequencer.CoefficientWrite
	for _, w := range rec.Coefficients {
		if w.Step == step {
			out = append(out, w)
		}
	}
	return out
}

// The arithmetic, worked by hand: a unit measured with slope s = 199.5 and
// intercept c = 2.4987 V, trimmed to G = 200, Y0 = 2.5 V:
//
//	k = G/s = 200/199.5 = 1.00250626566416
//	m = Y0 − k·c = 2.5 − 1.00250626566416·2.4987 = −0.00496240601504 V
//	∂k/∂c = 0, ∂k/∂s = −G/s² = −0.00502509406348
//	∂m/∂c = −k, ∂m/∂s = G·c/s² = 0.01255620253642
//
// With an offset coefficient only, k = 1 and m = Y0 − c = 0.0013 V.
func TestCoefficientValuesHandWorked(t *testing.T) {
	v, err := sequencer.CoefficientPlan{Gain: true, Offset: true}.Values(199.5, 2.4987, 200, 2.5)
	if err != nil {
		t.Fatal(err)
	}
	near := func(what string, got, want, tol float64) {
		t.Helper()
		if math.Abs(got-want) > tol {
			t.Errorf("%s = %.15g, want %.15g", what, got, want)
		}
	}
	near("k", v.K, 1.00250626566416, 1e-13)
	near("m", v.M, -0.00496240601504, 1e-13)
	near("∂k/∂c", v.DK[0], 0, 0)
	near("∂k/∂s", v.DK[1], -0.00502509406348, 1e-13)
	near("∂m/∂c", v.DM[0], -1.00250626566416, 1e-13)
	near("∂m/∂s", v.DM[1], 0.01255620253642, 1e-13)

	v, err = sequencer.CoefficientPlan{Offset: true}.Values(199.5, 2.4987, 200, 2.5)
	if err != nil {
		t.Fatal(err)
	}
	near("offset only: k", v.K, 1, 0)
	near("offset only: m", v.M, 0.0013, 1e-15)
	near("offset only: ∂m/∂c", v.DM[0], -1, 0)

	if _, err := (sequencer.CoefficientPlan{Gain: true}).Values(-199.5, 2.4987, 200, 2.5); err == nil || !strings.Contains(err.Error(), "wrong sign") {
		t.Errorf("a slope of the wrong sign: err = %v, want one saying so", err)
	}
}

// The encodings of the hand-worked k and m in each declared format, as the
// sequence file declares them (scale and unit converted at load):
//
//	Q2.14 hex:   k·2^14 = 16425.063 → 16425 = 0x4029, standing for 1.00250244140625
//	float32 dec: k → nearest float32 1.0025062561035156, shortest text "1.0025063"
//	int16, 10 µV a count, in mV, decimal: m = −4.962406 mV → −496.24 counts → "-496"
//	int16 as above, hex: −496 → 65536 − 496 = 65040 = 0xFE10
//	float32 decimal offset in mV: −4.962406 mV → "-4.962406"
func TestCoefficientEncodingsHandWorked(t *testing.T) {
	k, m := 200/199.5, (2.5-200/199.5*2.4987)*1e3 // m in mV, the coefficient's unit
	for _, c := range []struct {
		seq       string
		what      string
		v         float64
		text      string
		value     float64
		halfCount float64 // half the resolution, in the coefficient's unit
	}{
		{coefSeq, "gain", k, "4029", 16425.0 / 16384, 0.5 / 16384},
		{replaceAll(t, coefSeq, "format: Q2.14\n    text: hex", "format: float32"), "gain", k, "1.0025063", 1.0025062561035156, 0.5 * 0x1p-23},
		{coefSeq, "offset", m, "-496", -4.96, 0.005},
		{replaceAll(t, coefSeq, "scale: 10 uV\n    unit: mV", "scale: 10 uV\n    unit: mV\n    text: hex"), "offset", m, "FE10", -4.96, 0.005},
		{replaceAll(t, coefSeq, "format: int16\n    scale: 10 uV", "format: float32"), "offset", m, "-4.962406", -4.962406158447266, 0.5 * 0x1p-21},
	} {
		seq, err := sequencer.ParseSequence("coef.yaml", []byte(c.seq), demoReader(t, map[string]string{"brx200-limits.yaml": withLimits(t, coefLimits)}))
		if err != nil {
			t.Fatal(err)
		}
		k, _ := seq.Coefficient(c.what)
		text, value, err := k.Format.Encode(c.v)
		if err != nil || text != c.text || math.Abs(value-c.value) > 1e-15*math.Abs(c.value) {
			t.Errorf("%s %s: Encode(%.12g) = %q, %.17g, %v; want %q, %.17g", c.what, k.Format, c.v, text, value, err, c.text, c.value)
		}
		if r := k.Format.Resolution(value) / 2; math.Abs(r-c.halfCount) > 1e-12*c.halfCount {
			t.Errorf("%s %s: half a resolution %g, want %g", c.what, k.Format, r, c.halfCount)
		}
	}
}

// lineRecord is a stored record of coefSeq whose raw sweep lies exactly on
// y = 2.4987 V + 199.5·x (two readings 1 µV either side of each point), with
// what the unit answered: for replay, which recomputes the coefficients from it.
func lineRecord(readback map[string]string) *sequencer.Record {
	rec := &sequencer.Record{Schema: 2, RunID: "R1", Serial: "BRX-00001", Verdict: sequencer.Pass}
	sw := sequencer.Sweep{Name: "raw"}
	t0 := time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)
	for _, x := range []float64{-10e-3, -5e-3, 0, 5e-3, 10e-3} {
		y := 2.4987 + 199.5*x
		p := sequencer.Point{Stimulus: x}
		for _, d := range []float64{1e-6, -1e-6, 1e-6, -1e-6} {
			p.Readings = append(p.Readings, instruments.Reading{Value: y + d, Time: t0})
		}
		sw.Points = append(sw.Points, p)
	}
	rec.Sweeps = []sequencer.Sweep{sw}
	rec.Coefficients = []sequencer.CoefficientWrite{
		{Step: "clear trim", Name: "gain", Written: true, Found: "4100", Readback: "4000"},
		{Step: "clear trim", Name: "offset", Written: true, Found: "250", Readback: "0"},
		{Step: "correct", Name: "gain", Written: true, Readback: readback["gain"], Stored: true},
		{Step: "correct", Name: "offset", Written: true, Readback: readback["offset"], Stored: true},
	}
	return rec
}

// Replay computes the coefficients from the recorded readings by the step's own
// code: the hand-worked k and m of TestCoefficientValuesHandWorked (the points
// lie on that line), their words, and the written values' uncertainties:
// u² = gᵀ·CovTotal·g (g the sensitivities above) + (resolution)²/12.
func TestCoefficientsFromARecordedLine(t *testing.T) {
	_, cfg := coefBench(t, coefSeq)
	rec, err := sequencer.Replay(cfg, lineRecord(map[string]string{"gain": "4029", "offset": "-496"}))
	if err != nil {
		t.Fatal(err)
	}
	if rec.Verdict != sequencer.Pass {
		t.Fatalf("verdict %s %v, want PASS", rec.Verdict, rec.Reasons)
	}
	fit := rec.Fits[0]
	if math.Abs(fit.Slope-199.5) > 1e-9 || math.Abs(fit.Intercept-2.4987) > 1e-12 {
		t.Fatalf("fit %.12g, %.12g: the recorded line is 199.5, 2.4987", fit.Slope, fit.Intercept)
	}
	ws := coefWrites(rec, "correct")
	if len(ws) != 2 {
		t.Fatalf("coefficients step wrote %+v, want gain and offset", ws)
	}
	g, o := ws[0], ws[1]
	if g.Name != "gain" || g.Text != "4029" || g.Value != 16425.0/16384 || math.Abs(g.Ideal-1.00250626566416) > 1e-9 || !g.Match || !g.Stored || g.Format != "Q2.14 hex" {
		t.Errorf("gain: %+v; want 4029 standing for 16425/16384 from ideal 1.00250626566416, matched, stored", g)
	}
	if o.Name != "offset" || o.Text != "-496" || math.Abs(o.Value+4.96) > 1e-14 || math.Abs(o.Ideal-(-4.96240601504)) > 1e-6 || o.Unit != "mV" || !o.Match {
		t.Errorf("offset: %+v; want -496 standing for -4.96 mV from ideal -4.96240601504 mV, matched", o)
	}
	c := fit.CovTotal
	quad := func(g [2]float64) float64 {
		return g[0]*g[0]*c[0][0] + 2*g[0]*g[1]*c[0][1] + g[1]*g[1]*c[1][1]
	}
	k := 200 / 199.5
	for _, x := range []struct {
		name      string
		value     float64 // SI
		grad      [2]float64
		res       float64 // SI
		idealU, u float64 // IdealU in the coefficient's unit; SI per unit
	}{
		{"coef_gain", 16425.0 / 16384, [2]float64{0, -200 / (199.5 * 199.5)}, 1.0 / 16384, g.IdealU, 1},
		{"coef_offset", -4.96e-3, [2]float64{-k, 200 * 2.4987 / (199.5 * 199.5)}, 1e-5, o.IdealU, 1e-3},
	} {
		r := resultOf(t, rec, x.name)
		fitU := math.Sqrt(quad(x.grad))
		want := math.Sqrt(fitU*fitU + x.res*x.res/12)
		if !r.Valid || math.Abs(r.Value-x.value) > 1e-15*math.Abs(x.value) || math.Abs(r.Unc.Std-want) > 1e-9*want {
			t.Errorf("%s = %.15g ± %.6g (u), want %.15g ± %.6g", x.name, r.Value, r.Unc.Std, x.value, want)
		}
		if math.Abs(x.idealU*x.u-fitU) > 1e-9*fitU {
			t.Errorf("%s: recorded IdealU %g (in the coefficient's unit), want the fit's %g", x.name, x.idealU, fitU/x.u)
		}
	}
	if r := resultOf(t, rec, "coef_gain"); r.Unit != "number" {
		t.Errorf("coef_gain unit %q, want number (a plain factor)", r.Unit)
	}
	if r := resultOf(t, rec, "coef_offset"); r.Unit != "V" {
		t.Errorf("coef_offset unit %q, want V (the response)", r.Unit)
	}
	cl := coefWrites(rec, "clear trim")
	if len(cl) != 2 || cl[0].Text != "4000" || cl[0].Found != "4100" || cl[0].FoundValue != 0x4100/16384.0 || cl[1].Text != "0" || math.Abs(cl[1].FoundValue-2.5) > 1e-14 {
		t.Errorf("clear trim: %+v; want gain 4000 (1.0) found 4100 (1.015625), offset 0 found 250 (2.5 mV)", cl)
	}
}

// On the bench: clear_trim reads what the unit held, writes no correction; the
// coefficients step writes the words of the fit's k and m, reads them back, and
// store marks them committed; the record replays.
func TestCoefficientsOnTheBench(t *testing.T) {
	e, cfg := coefBench(t, coefSeq)
	rec := runReplayed(t, e, cfg, "BRX-00001")
	if rec.Verdict != sequencer.Pass {
		t.Fatalf("verdict %s %v %s", rec.Verdict, rec.Reasons, rec.Fault)
	}
	cl := coefWrites(rec, "clear trim")
	if len(cl) != 2 || cl[0].Found != "4100" || cl[0].Text != "4000" || !cl[0].Match || cl[1].Found != "250" || cl[1].Text != "0" || cl[0].Stored || cl[1].Stored {
		t.Errorf("clear trim wrote %+v; want found 4100 and 250, no correction 4000 and 0, superseded (not stored)", cl)
	}
	fit := rec.Fits[0]
	seq := cfg.Sequence
	ws := coefWrites(rec, "correct")
	if len(ws) != 2 {
		t.Fatalf("coefficients step wrote %+v", ws)
	}
	k := seq.IdealGain / fit.Slope
	m := (seq.IdealOffset - k*fit.Intercept) * 1e3 // mV
	for i, want := range []float64{k, m} {
		w := ws[i]
		kc, _ := seq.Coefficient(w.Adjusts)
		text, value, _ := kc.Format.Encode(want)
		if math.Abs(w.Ideal-want) > 1e-12*math.Abs(want) || w.Text != text || w.Value != value || !w.Written || !w.Match || !w.Stored {
			t.Errorf("%s: %+v; want ideal %.12g written as %q, read back, stored", w.Name, w, want, text)
		}
	}
	coefPort.Lock()
	regs, writes := coefPort.regs, coefPort.writes
	coefPort.Unlock()
	if regs["GAIN"] != ws[0].Text || regs["OFS"] != ws[1].Text {
		t.Errorf("the unit holds %v, the record says %q and %q", regs, ws[0].Text, ws[1].Text)
	}
	if want := []string{"CAL GAIN 4000", "CAL OFS 0", "CAL GAIN " + ws[0].Text, "CAL OFS " + ws[1].Text}; fmt.Sprint(writes) != fmt.Sprint(want) {
		t.Errorf("writes %q, want %q", writes, want)
	}
}

// A word that does not read back fails the unit (it answered: no station fault),
// naming the coefficient, the word written and the reply; the run ends before
// store. The record replays to the same verdict.
func TestCoefficientReadbackMismatchFails(t *testing.T) {
	e, cfg := coefBench(t, coefSeq)
	coefPort.Lock()
	coefPort.skew = map[string]string{"GAIN": "3FFF"}
	coefPort.Unlock()
	rec := runReplayed(t, e, cfg, "BRX-00002")
	if rec.Verdict != sequencer.Fail {
		t.Fatalf("verdict %s %v %s, want FAIL", rec.Verdict, rec.Reasons, rec.Fault)
	}
	g := coefWrites(rec, "correct")[0]
	want := fmt.Sprintf("coefficient gain read back %q after writing %q", "3FFF", g.Text)
	if !strings.Contains(strings.Join(rec.Reasons, "\n"), want) {
		t.Errorf("reasons %q, want one containing %q", rec.Reasons, want)
	}
	if g.Match || !g.Written || g.Readback != "3FFF" {
		t.Errorf("gain write %+v, want written, read back 3FFF, no match", g)
	}
	if s := stepStatus(t, rec, "store"); s.Status != sequencer.StepNotReached {
		t.Errorf("store: %+v, want not reached", s)
	}
}

// A port error on a write, or an ERR reply to a read, is a station fault.
func TestCoefficientPortErrorsAreFaults(t *testing.T) {
	for _, c := range []struct {
		name           string
		errOn, errRead string
		want           string
	}{
		{"write refused", "CAL OFS", "", "write coefficient offset"},
		{"ERR reply", "", "OFS", `the unit answered "ERR bad register"`},
	} {
		t.Run(c.name, func(t *testing.T) {
			e, _ := coefBench(t, coefSeq)
			coefPort.Lock()
			coefPort.errOn, coefPort.errRead = c.errOn, c.errRead
			coefPort.Unlock()
			rec := e.Run(context.Background(), "BRX-00003")
			if rec.Verdict != sequencer.Fault || !strings.Contains(rec.Fault, c.want) {
				t.Errorf("verdict %s, fault %q %q; want FAULT containing %q", rec.Verdict, rec.Fault, rec.Reasons, c.want)
			}
		})
	}
}

// A gain the format cannot hold fails the unit with the range in the reason, and
// nothing is written by the coefficients step. The ideal gain of 800 V/V asks a
// 200 V/V unit for k ≈ 4, beyond Q2.14's largest value 2 − 2⁻¹⁴ = 1.99994.
func TestCoefficientOutsideFormatFails(t *testing.T) {
	e, cfg := coefBench(t, replaceAll(t, coefSeq, "gain: 200, offset", "gain: 800, offset"))
	rec := runReplayed(t, e, cfg, "BRX-00004")
	if rec.Verdict != sequencer.Fail {
		t.Fatalf("verdict %s %v %s, want FAIL", rec.Verdict, rec.Reasons, rec.Fault)
	}
	k := 800 / rec.Fits[0].Slope
	want := fmt.Sprintf("coefficient gain %.6g outside Q2.14's range −2 … 1.99994", k)
	if !strings.Contains(strings.Join(rec.Reasons, "\n"), want) {
		t.Errorf("reasons %q, want one containing %q", rec.Reasons, want)
	}
	for _, w := range coefWrites(rec, "correct") {
		if w.Written {
			t.Errorf("%s written after a coefficient outside its range: %+v", w.Name, w)
		}
	}
	coefPort.Lock()
	n := len(coefPort.writes)
	coefPort.Unlock()
	if n != 2 {
		t.Errorf("%d CAL writes, want clear_trim's 2 only", n)
	}
	if r := resultOf(t, rec, "coef_gain"); r.Valid {
		t.Errorf("coef_gain %+v valid, want flagged", r)
	}
}

// The TUR prediction sees a unit with the ideal transfer: k = 1 and m = 0, with
// an uncertainty at least the rounding's (resolution/√12).
func TestCoefficientsPredicted(t *testing.T) {
	_, cfg := coefBench(t, coefSeq)
	got := sequencer.PredictUncertainty(cfg.Station, cfg.Sequence)
	g, o := got["coef_gain"], got["coef_offset"]
	if g.V != 1 || !(g.Std >= (1.0/16384)/math.Sqrt(12)) {
		t.Errorf("predicted coef_gain %+v, want 1 with u ≥ 2⁻¹⁴/√12", g)
	}
	if math.Abs(o.V) > 1e-5 || !(o.Std >= 1e-5/math.Sqrt(12)) {
		t.Errorf("predicted coef_offset %+v, want 0 within a count with u ≥ 10 µV/√12", o)
	}
}

// Every bad key or value of coefficients: and of the step is refused at its line.
func TestCoefficientLoadErrors(t *testing.T) {
	for _, c := range []struct {
		old, new string // a replacement in coefSeq
		at, msg  string // the line's text, and a piece of the message
	}{
		{"format: Q2.14", "format: Q2.x", "format: Q2.x", `expected Q<m>.<n>`},
		{"format: Q2.14", "format: fixed16", "format: fixed16", "expected float32, Q<m>.<n>"},
		{"    text: hex\n", "    text: octal\n", "text: octal", "expected decimal or hex"},
		{"    scale: 10 uV\n", "", "  - name: offset", `missing required key "scale"`},
		{"format: Q2.14", "format: Q2.14\n    scale: 1e-4", "scale: 1e-4", "scale applies to int<bits> formats only"},
		{"scale: 10 uV", "scale: 1 mA", "scale: 1 mA", "expected a voltage"},
		{"adjusts: offset", "adjusts: gain", "adjusts: gain\n    format: int16", "adjusts gain already"},
		{"adjusts: offset", "adjusts: drift", "adjusts: drift", "expected gain, offset, offset_tc or gain_tc"},
		{`write: "CAL GAIN {value}"`, `write: "CAL GAIN"`, `write: "CAL GAIN"`, "containing {value} once"},
		{`write: "CAL GAIN {value}"`, `write: "CAL GAIN {value} {value}"`, `write: "CAL GAIN {value} {value}"`, "found it 2 times"},
		{`    read: "CAL GAIN?"` + "\n", "", "  - name: gain", `missing required key "read"`},
		{"unit: mV", "unit: mA", "unit: mA", "expected a unit of the response"},
		{"    text: hex\n", "    text: hex\n    unit: V\n", "unit: V", "unit applies to offset coefficients only"},
		{"format: Q2.14", "format: Q1.15", "format: Q1.15", "cannot hold 1"},
		{"format: Q2.14", "format: int16\n    scale: 3e-4", "scale: 3e-4", "1 rounds to"},
		{"  - name: offset", "  - name: gain", "  - name: gain\n    adjusts: offset", `coefficient name "gain" is already used`},
		{"    text: hex\n", "    text: hex\n    scaling: 2\n", "scaling: 2", "unknown"},
		{"fit: raw fit", "fit: nothing", "fit: nothing", `no earlier fit step called "nothing"`},
		{"results: {gain: coef_gain, offset: coef_offset}", "results: {gain: coef_gain, drift: x}", "results: {gain: coef_gain, drift: x}", `unknown coefficients result "drift"`},
		{"  - kind: clear_trim\n    name: clear trim\n", "", "fit: raw fit", "no clear_trim step precedes"},
	} {
		seq := replaceAll(t, coefSeq, c.old, c.new)
		_, err := sequencer.ParseSequence("coef.yaml", []byte(seq), demoReader(t, map[string]string{"brx200-limits.yaml": withLimits(t, coefLimits)}))
		wantErrorAt(t, err, "coef.yaml", seq, c.at, c.msg)
	}
}

// A product without coefficients records none: clear_trim and store are as they
// were (the golden certificate of the demo product is byte-identical).
func TestNoCoefficientsNoRecord(t *testing.T) {
	e, cfg := kindsBench{seq: demoFile(t, "brx200-sequence.yaml"), set: map[string]map[string]string{"dut": {"defect_rate": "0"}}}.open(t)
	rec := runReplayed(t, e, cfg, "BRX-00005")
	if rec.Coefficients != nil {
		t.Errorf("a product without coefficients recorded %+v", rec.Coefficients)
	}
}

// With an offset coefficient only, k = 1: m = Y0 − c, and only the offset is
// written (after clear_trim's one write).
func TestOffsetCoefficientOnly(t *testing.T) {
	seq := replaceAll(t, coefSeq,
		"  - name: gain\n    adjusts: gain\n    format: Q2.14\n    text: hex\n    write: \"CAL GAIN {value}\"\n    read: \"CAL GAIN?\"\n", "",
		"results: {gain: coef_gain, offset: coef_offset}", "results: {offset: coef_offset}")
	e, cfg := coefBench(t, seq)
	rec := runReplayed(t, e, cfg, "BRX-00006")
	if rec.Verdict != sequencer.Pass {
		t.Fatalf("verdict %s %v %s", rec.Verdict, rec.Reasons, rec.Fault)
	}
	ws := coefWrites(rec, "correct")
	want := (cfg.Sequence.IdealOffset - rec.Fits[0].Intercept) * 1e3 // mV
	if len(ws) != 1 || ws[0].Name != "offset" || math.Abs(ws[0].Ideal-want) > 1e-12*math.Abs(want) || !ws[0].Match {
		t.Errorf("wrote %+v; want the offset alone, ideal %.12g mV", ws, want)
	}
	coefPort.Lock()
	writes := coefPort.writes
	coefPort.Unlock()
	if len(writes) != 2 || writes[0] != "CAL OFS 0" {
		t.Errorf("writes %q, want CAL OFS 0 then the offset", writes)
	}
}
