package sequencer_test

// Quantities other than volts, and the unit as its own meter, on a fake bench:
// a source, meters that read the unit's loop current or its supply current, and a
// DUT port that reports its output as a count.

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
	"trimline/sequencer"
)

// qbench is one opened fake bench. The unit's response is gain·level + offset
// (in A for a current output, in counts for a reported one) while the source
// output is on, and offset while it is off.
type qbench struct {
	mu        sync.Mutex
	level     float64
	on        bool
	gain      float64
	offset    float64
	supply    float64    // the unit's supply current, A
	reply     string     // when set, the port answers this to every query
	functions [][]string // per meter role: the functions it was set to, in order
	queries   []string
}

func (b *qbench) response() float64 {
	if b.on {
		return b.gain*b.level + b.offset
	}
	return b.offset
}

var lastQBench struct {
	sync.Mutex
	b *qbench
}

// qbenchDriver opens fake benches (addresses qbench://source, qbench://meter,
// qbench://supply, qbench://dut). The unit is described in the source role's
// settings, the one role every run opens: gain and offset of the unit and its
// supply current (SI numbers), reply (a fixed answer to every query); a meter
// role's fixed: voltage makes a meter that cannot be set to a current.
type qbenchDriver struct{}

func (qbenchDriver) Open(context.Context, *url.URL, instruments.Spec) (instruments.Instrument, error) {
	return nil, errors.New("qbench: open as a group")
}

func (qbenchDriver) OpenGroup(_ context.Context, specs []instruments.Spec) ([]instruments.Instrument, error) {
	b := &qbench{}
	out := make([]instruments.Instrument, len(specs))
	for i, s := range specs {
		switch what := strings.TrimPrefix(s.Address, "qbench://"); what {
		case "source":
			fmt.Sscan(s.Settings["gain"], &b.gain)
			fmt.Sscan(s.Settings["offset"], &b.offset)
			fmt.Sscan(s.Settings["supply"], &b.supply)
			b.reply = s.Settings["reply"]
			out[i] = &qSource{b}
		case "meter", "supply":
			m := &qMeter{b: b, i: len(b.functions), supply: what == "supply"}
			b.functions = append(b.functions, nil)
			if s.Settings["fixed"] == "voltage" {
				out[i] = &qVoltMeter{m}
			} else {
				out[i] = m
			}
		case "dut":
			out[i] = &qPort{b}
		default:
			return nil, fmt.Errorf("qbench: no %q", what)
		}
	}
	lastQBench.Lock()
	lastQBench.b = b
	lastQBench.Unlock()
	return out, nil
}

func init() { instruments.Register("qbench", qbenchDriver{}) }

type qSource struct{ b *qbench }

func (s *qSource) Close() error { return nil }
func (s *qSource) SetLevel(_ context.Context, v float64) error {
	s.b.mu.Lock()
	defer s.b.mu.Unlock()
	s.b.level = v
	return nil
}
func (s *qSource) SetOutput(_ context.Context, on bool) error {
	s.b.mu.Lock()
	defer s.b.mu.Unlock()
	s.b.on = on
	return nil
}
func (s *qSource) SetCompliance(context.Context, float64) error { return nil }

// qMeter reads the unit's response in the current function (its supply current
// when it is the supply meter) and 0 V in the voltage function. Readings
// alternate ±1 µA about the value, so the mean of an even number is exact.
type qMeter struct {
	b      *qbench
	i      int
	supply bool
	fn     instruments.Function
}

func (m *qMeter) Close() error { return nil }
func (m *qMeter) SetFunction(_ context.Context, f instruments.Function) error {
	m.b.mu.Lock()
	defer m.b.mu.Unlock()
	m.fn = f
	m.b.functions[m.i] = append(m.b.functions[m.i], string(f))
	return nil
}
func (m *qMeter) Read(_ context.Context, n int) ([]instruments.Reading, error) {
	m.b.mu.Lock()
	defer m.b.mu.Unlock()
	y := 0.0
	if m.fn == instruments.FuncCurrent {
		y = m.b.response()
		if m.supply {
			y = m.b.supply
		}
	}
	out := make([]instruments.Reading, n)
	for i := range out {
		d := 1e-6
		if i%2 == 1 {
			d = -d
		}
		out[i] = instruments.Reading{Value: y + d, Time: time.Unix(0, 0)}
	}
	return out, nil
}

// qVoltMeter is a meter with no function setting: DC volts only.
type qVoltMeter struct{ m *qMeter }

func (v *qVoltMeter) Close() error { return nil }
func (v *qVoltMeter) Read(ctx context.Context, n int) ([]instruments.Reading, error) {
	return v.m.Read(ctx, n)
}

// qPort answers any query with the unit's response rounded to a whole count.
type qPort struct{ b *qbench }

func (p *qPort) Close() error                          { return nil }
func (p *qPort) Command(context.Context, string) error { return nil }
func (p *qPort) Query(_ context.Context, line string) (string, error) {
	p.b.mu.Lock()
	defer p.b.mu.Unlock()
	p.b.queries = append(p.b.queries, line)
	if p.b.reply != "" {
		return p.b.reply, nil
	}
	return fmt.Sprint(math.Round(p.b.response())), nil
}

// qStation is a fake bench's station file; unit and meter are the settings of
// the source and meter roles (YAML flow mappings), meterAccuracy the meter's
// accuracy: value.
func qStation(unit, meter, meterAccuracy string) string {
	return `station:
  id: TL9
  name: Fake bench for quantities

instruments:
  source:
    kind: voltage_source
    address: qbench://source
    asset: SRC-1
    cal_due: 2099-12-31
    accuracy: {of_reading: 20 ppm, of_range: 5 ppm, range: 1 V}
    settings: ` + unit + `
  meter:
    kind: meter
    address: qbench://meter
    asset: DMM-1
    cal_due: 2099-12-31
    settings: ` + meter + `
    accuracy: ` + meterAccuracy + `
  supply:
    kind: meter
    address: qbench://supply
    asset: DMM-2
    cal_due: 2099-12-31
    accuracy:
      - {of_reading: 30 ppm, of_range: 4 ppm, range: 10 V, resolution: 1 uV}
      - {of_reading: 500 ppm, of_range: 50 ppm, range: 100 mA, resolution: 100 nA}
  dut:
    kind: dut_port
    address: qbench://dut
    asset: FIX-1

safety:
  source_rating: {voltage: 2 V, current: 20 mA}
  max_source_voltage: 1.5 V
  max_source_current: 10 mA
`
}

// Both specs of the meter: DC volts and DC current.
const twoSpecs = `
      - {of_reading: 30 ppm, of_range: 4 ppm, range: 10 V, resolution: 1 uV}
      - {of_reading: 200 ppm, of_range: 20 ppm, range: 100 mA, resolution: 10 nA}`

// loopSequence is a 4–20 mA transmitter: 0.8 mA/mV from 0 to 20 mV.
const loopSequence = `sequence:
  product: LT-420
  revision: A
limits: limits.yaml
ideal:
  gain: 0.8 mA/mV
  offset: 4 mA
  full_scale: 16 mA
meter:
  range: 100 mA
steps:
  - kind: sweep
    name: loop
    from: 0 V
    to: 20 mV
    points: 5
    settle: 1 ms
    readings: 4
  - kind: fit
    sweep: loop
    results: {offset: loop_offset, gain_error: loop_gain_error, max_error: loop_max_error, noise: loop_noise}
  - kind: measure
    name: supply
    meter: supply
    quantity: current
    settle: 1 ms
    readings: 4
    results: {mean: supply_current, noise: supply_noise}
`

const loopLimits = `limit_set:
  name: LT-420 limits
  revision: "1"
  product: LT-420
decision:
  coverage: 95.45 %
  rule: guarded
  guard_factor: 1
  statements: non-binary
  conditional_pass: review
  min_tur: 1
  tur_policy: warn
limits:
  - name: loop offset
    description: Loop current at zero input, ±0.1 mA.
    unit: mA
    uses: [loop_offset]
    tolerance: {lower: -0.1, upper: 0.1}
  - name: loop noise
    description: Loop current noise.
    unit: uA
    uses: [loop_noise]
    tolerance: {upper: 5}
  - name: supply current
    description: Supply current at most 20 mA.
    unit: mA
    uses: [supply_current]
    tolerance: {upper: 20}
`

// countSequence is a unit that reports its output as a count: 3200 count/V,
// 100 count at zero input, read by the query MEAS?.
const countSequence = `sequence:
  product: RD-32
  revision: A
limits: limits.yaml
ideal:
  gain: 3200 count/V
  offset: 100 count
steps:
  - kind: sweep
    name: reported
    from: 0 V
    to: 1 V
    points: 5
    settle: 1 ms
    readings: 3
    response: {port: dut, query: "MEAS?", resolution: 1 count}
  - kind: fit
    sweep: reported
    results: {offset: rd_offset, gain_error: rd_gain_error}
  - kind: measure
    name: zero
    settle: 1 ms
    readings: 2
    response: {port: dut, query: "MEAS?", resolution: 1 count}
    results: {error: rd_zero_error}
`

const countLimits = `limit_set:
  name: RD-32 limits
  revision: "1"
  product: RD-32
decision:
  coverage: 95.45 %
  rule: guarded
  guard_factor: 1
  statements: non-binary
  conditional_pass: review
  min_tur: 1
  tur_policy: warn
limits:
  - name: reported offset
    description: Offset of the reported count, ±10 count.
    unit: count
    uses: [rd_offset]
    tolerance: {lower: -10, upper: 10}
  - name: zero error
    description: Reported count at zero input.
    unit: count
    uses: [rd_zero_error]
    tolerance: {lower: -10, upper: 10}
`

// qFiles loads a fake bench's station and a sequence with its limit file.
func qFiles(t *testing.T, station, sequence, limits string) (*sequencer.Station, *sequencer.Sequence) {
	t.Helper()
	st, err := sequencer.ParseStation("station.yaml", []byte(station))
	if err != nil {
		t.Fatal(err)
	}
	seq, err := sequencer.ParseSequence("seq.yaml", []byte(sequence), func(string) ([]byte, error) { return []byte(limits), nil })
	if err != nil {
		t.Fatal(err)
	}
	return st, seq
}

func outcomeOf(t *testing.T, rec *sequencer.Record, name string) bool {
	t.Helper()
	for _, o := range rec.Outcomes {
		if o.Name == name {
			return o.Pass
		}
	}
	t.Fatalf("no outcome %q", name)
	return false
}

func TestCurrentResponseSweep(t *testing.T) {
	// The unit: 0.8 A/V, 4.02 mA at zero input (20 µA offset error), 12.5 mA
	// from its supply.
	st, seq := qFiles(t, qStation(`{gain: "0.8", offset: "0.00402", supply: "0.0125"}`, `{}`, twoSpecs), loopSequence, loopLimits)
	e := openEngine(t, st, seq)
	rec := e.Run(context.Background(), "LT-0001")
	if rec.Verdict != sequencer.Pass {
		t.Fatalf("verdict %s, fault %q, reasons %q", rec.Verdict, rec.Fault, rec.Reasons)
	}
	lastQBench.Lock()
	b := lastQBench.b
	lastQBench.Unlock()
	// Both meters read currents only: set to the current function once, at open.
	for i, fs := range b.functions {
		if strings.Join(fs, ",") != "current" {
			t.Errorf("meter %d was set to %v, want current once", i, fs)
		}
	}
	if rec.ResponseUnit != "A" || rec.StimulusUnit != "" {
		t.Errorf("record units %q/%q, want \"\"/A", rec.StimulusUnit, rec.ResponseUnit)
	}
	// Hand-worked: intercept 4.02 mA − ideal 4 mA = 20 µA; the ±1 µA reading
	// pattern has mean 0 and, over 4 readings, s = √(4·1e-12/3) = 1.1547 µA.
	off := resultOf(t, rec, "loop_offset")
	near(t, "loop offset", off.Value, 20e-6, 1e-12)
	if off.Unit != "A" {
		t.Errorf("loop_offset unit %q, want A", off.Unit)
	}
	near(t, "loop noise", resultOf(t, rec, "loop_noise").Value, math.Sqrt(4e-12/3), 1e-12)
	near(t, "gain error", resultOf(t, rec, "loop_gain_error").Value, 0, 1e-9)
	sup := resultOf(t, rec, "supply_current")
	near(t, "supply current", sup.Value, 12.5e-3, 1e-12)
	if sup.Unit != "A" {
		t.Errorf("supply_current unit %q, want A", sup.Unit)
	}
	if !outcomeOf(t, rec, "loop offset") || !outcomeOf(t, rec, "supply current") {
		t.Errorf("limits in mA: %+v", rec.Outcomes)
	}
	// The meter's current spec (200 ppm of reading + 20 ppm of 100 mA) is the
	// one used: at 20 mV the loop carries 20.02 mA, half-width 200e-6·20.02e-3 +
	// 20e-6·0.1 = 6.004 µA; half a count of 10 nA is 0.005 µA; the source spec
	// through the gain 0.8·(20e-6·0.02 + 5e-6·1) = 4.32 µA; each rectangular:
	// u = √(6.004² + 0.005² + 4.32²)/√3 µA = 4.2705 µA.
	want := math.Sqrt(6.004e-6*6.004e-6+5e-9*5e-9+4.32e-6*4.32e-6) / math.Sqrt(3)
	near(t, "u at 20.02 mA", rec.Sweeps[0].Points[4].USys, want, 1e-12)
	var meterRef string
	for _, in := range rec.Instruments {
		if in.Role == "meter" {
			meterRef = in.Accuracy
		}
	}
	if !strings.Contains(meterRef, "range 10 V") || !strings.Contains(meterRef, "range 100 mA") {
		t.Errorf("meter accuracy in the record %q: want both specs", meterRef)
	}
	replayed, err := sequencer.Replay(sequencer.Config{Station: st, Sequence: seq}, rec)
	if err != nil {
		t.Fatal(err)
	}
	if d := sequencer.Differences(rec, replayed); len(d) > 0 {
		t.Errorf("replay differs: %q", d)
	}
}

func TestReportedResponseSweep(t *testing.T) {
	// The unit reports 3200 count/V with 103 count at zero (3 count offset).
	st, seq := qFiles(t, qStation(`{gain: "3200", offset: "103"}`, `{}`, twoSpecs), countSequence, countLimits)
	e := openEngine(t, st, seq)
	rec := e.Run(context.Background(), "RD-0001")
	if rec.Verdict != sequencer.Pass {
		t.Fatalf("verdict %s, fault %q, reasons %q", rec.Verdict, rec.Fault, rec.Reasons)
	}
	for _, in := range rec.Instruments {
		if in.Role == "meter" || in.Role == "supply" {
			t.Errorf("the run used the %s role: the unit is its own meter", in.Role)
		}
	}
	if rec.ResponseUnit != "count" {
		t.Errorf("response unit %q, want count", rec.ResponseUnit)
	}
	off := resultOf(t, rec, "rd_offset")
	near(t, "reported offset", off.Value, 3, 1e-9)
	if off.Unit != "count" {
		t.Errorf("rd_offset unit %q, want count", off.Unit)
	}
	near(t, "zero error", resultOf(t, rec, "rd_zero_error").Value, 3, 1e-9)
	if !outcomeOf(t, rec, "reported offset") {
		t.Errorf("limit in count: %+v", rec.Outcomes)
	}
	// Hand-worked at 1 V: no meter spec; resolution 1 count gives 0.5/√3 =
	// 0.288675 count; the source spec 20 ppm·1 V + 5 ppm·1 V = 25 µV through
	// 3200 count/V is 0.08 count, /√3 = 0.046188; u = √(0.083333 + 0.0021333)
	// = 0.292347 count. The replies do not scatter: no Type A part.
	p := rec.Sweeps[0].Points[4]
	near(t, "u at 1 V", p.USys, 0.292347, 1e-6)
	if p.URandom != 0 {
		t.Errorf("Type A %g, want 0", p.URandom)
	}
	if p.Readings[0].Value != 3303 || len(p.Readings) != 3 {
		t.Errorf("readings at 1 V %+v, want 3 of 3303", p.Readings)
	}
	// Prediction: the station reaches a TUR on the reported offset.
	pred := sequencer.PredictUncertainty(st, seq)
	if v, ok := pred["rd_offset"]; !ok || !(v.U > 0) {
		t.Errorf("predicted rd_offset %+v", v)
	}
	replayed, err := sequencer.Replay(sequencer.Config{Station: st, Sequence: seq}, rec)
	if err != nil {
		t.Fatal(err)
	}
	if d := sequencer.Differences(rec, replayed); len(d) > 0 {
		t.Errorf("replay differs: %q", d)
	}
}

func TestReportedReplyThatIsNoNumberFaults(t *testing.T) {
	st, seq := qFiles(t, qStation(`{gain: "3200", offset: "103", reply: "ERR -113"}`, `{}`, twoSpecs), countSequence, countLimits)
	e := openEngine(t, st, seq)
	rec := e.Run(context.Background(), "RD-0002")
	if rec.Verdict != sequencer.Fault {
		t.Fatalf("verdict %s, want FAULT", rec.Verdict)
	}
	for _, want := range []string{"reported sweep at 0 V", `"ERR -113"`, "no number"} {
		if !strings.Contains(rec.Fault, want) {
			t.Errorf("fault %q does not say %q", rec.Fault, want)
		}
	}
}

func TestCurrentThroughAVoltmeterIsRefused(t *testing.T) {
	st, seq := qFiles(t, qStation(`{gain: "0.8", offset: "0.004", supply: "0.0125"}`, `{fixed: voltage}`, twoSpecs), loopSequence, loopLimits)
	_, err := sequencer.Open(context.Background(), sequencer.Config{Station: st, Sequence: seq})
	if err == nil || !strings.Contains(err.Error(), "reads a current through the meter") {
		t.Fatalf("Open: %v, want a refusal of the current reading", err)
	}
}

func TestAccuracyListSelection(t *testing.T) {
	st, err := sequencer.ParseStation("station.yaml", []byte(qStation(`{}`, `{}`, twoSpecs)))
	if err != nil {
		t.Fatal(err)
	}
	m := st.Instruments["meter"]
	if v, a := m.SpecFor(1), m.SpecFor(2); v.Range != 10 || a.Range != 0.1 || a.Resolution != 10e-9 { // units.Volt, units.Ampere
		t.Errorf("SpecFor volts %+v, amperes %+v", v, a)
	}
	// A single mapping still works and counts as the volt spec.
	st, err = sequencer.ParseStation("station.yaml", []byte(qStation(`{}`, `{}`, `{of_reading: 30 ppm, of_range: 4 ppm, range: 10 V}`)))
	if err != nil {
		t.Fatal(err)
	}
	if v := st.Instruments["meter"].SpecFor(1); v.Range != 10 {
		t.Errorf("single spec: %+v", v)
	}
	// A sequence that reads a current through a meter with no current spec does
	// not fit the station.
	_, seq := qFiles(t, qStation(`{}`, `{}`, twoSpecs), loopSequence, loopLimits)
	err = sequencer.CheckCaps(st, seq)
	if !errors.Is(err, sequencer.ErrUnboundRole) || !strings.Contains(err.Error(), "no accuracy spec with a range in A") {
		t.Errorf("CheckCaps: %v", err)
	}
}

// qLineOf is the 1-based line of the first line of text holding s.
func qLineOf(text, s string) int {
	i := strings.Index(text, s)
	if i < 0 {
		return -1
	}
	return strings.Count(text[:i], "\n") + 1
}

func TestQuantityLoadErrorsArePositioned(t *testing.T) {
	for _, c := range []struct {
		name, from, to, want string
	}{
		{"stimulus neither volts nor amperes", "gain: 0.8 mA/mV", "gain: 0.8 mA/ohm", "expected a gain per volt or per ampere of stimulus"},
		{"offset in volts", "offset: 4 mA", "offset: 4 V", "expected a current (A)"},
		{"full scale in counts", "full_scale: 16 mA", "full_scale: 16 count", "expected a current (A)"},
		{"meter and response", "    name: loop\n", "    name: loop\n    meter: meter\n    response: {port: dut, query: \"X?\", resolution: 1 uA}\n", "either meter or response"},
		{"error of another quantity", "quantity: current\n    settle: 1 ms\n    readings: 4\n    results: {mean: supply_current, noise: supply_noise}",
			"quantity: voltage\n    settle: 1 ms\n    readings: 4\n    results: {mean: supply_current, error: supply_error}", "has no ideal"},
		{"meter range of another quantity", "    name: loop\n", "    name: loop\n    meter_range: 10 V\n", "expected a range in the unit of the current"},
		{"unknown quantity", "quantity: current", "quantity: power", "expected voltage, current or count"},
	} {
		t.Run(c.name, func(t *testing.T) {
			text := strings.Replace(loopSequence, c.from, c.to, 1)
			if text == loopSequence {
				t.Fatal("the edit did not apply")
			}
			_, err := sequencer.ParseSequence("seq.yaml", []byte(text), func(string) ([]byte, error) { return []byte(loopLimits), nil })
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("got %v, want %q", err, c.want)
			}
			at := fmt.Sprintf("seq.yaml:%d:", qLineOf(text, strings.TrimSpace(strings.Split(strings.TrimSpace(c.to), "\n")[len(strings.Split(strings.TrimSpace(c.to), "\n"))-1])))
			if !strings.Contains(err.Error(), at) {
				t.Errorf("%v\nis not positioned at %s", err, at)
			}
		})
	}
	// A count response is read by the unit, not by a meter.
	text := strings.Replace(countSequence, `    response: {port: dut, query: "MEAS?", resolution: 1 count}
  - kind: fit`, "  - kind: fit", 1)
	_, err := sequencer.ParseSequence("seq.yaml", []byte(text), func(string) ([]byte, error) { return []byte(countLimits), nil })
	if err == nil || !strings.Contains(err.Error(), "a meter reads volts or amperes") {
		t.Errorf("count response through a meter: %v", err)
	}
	// A response resolution must be in the response's unit.
	text = strings.Replace(countSequence, "resolution: 1 count}\n  - kind: fit", "resolution: 1 mV}\n  - kind: fit", 1)
	_, err = sequencer.ParseSequence("seq.yaml", []byte(text), func(string) ([]byte, error) { return []byte(countLimits), nil })
	if want := fmt.Sprintf("seq.yaml:%d:", qLineOf(text, "1 mV")); err == nil || !strings.Contains(err.Error(), "expected a count") || !strings.Contains(err.Error(), want) {
		t.Errorf("resolution in volts: %v", err)
	}
	// Station: two specs of one dimension and one range (10 V written twice,
	// once as 10000 mV); a range of another dimension.
	for _, c := range []struct{ acc, want string }{
		{"\n      - {of_reading: 30 ppm, of_range: 4 ppm, range: 10 V}\n      - {of_reading: 35 ppm, of_range: 5 ppm, range: 10000 mV}", "a second spec for the 10 V range (accuracy[0] is one already)"},
		{"{of_reading: 30 ppm, of_range: 4 ppm, range: 10 ppm}", "expected a positive voltage or current range"},
	} {
		text := qStation(`{}`, `{}`, c.acc)
		_, err := sequencer.ParseStation("station.yaml", []byte(text))
		last := c.acc[strings.LastIndex(c.acc, "{"):]
		if want := fmt.Sprintf("station.yaml:%d:", qLineOf(text, last)); err == nil || !strings.Contains(err.Error(), c.want) || !strings.Contains(err.Error(), want) {
			t.Errorf("station accuracy %q: %v, want %q at %s", c.acc, err, c.want, want)
		}
	}
}

// A measure reads another quantity than the response through a second meter
// role, which the engine sets to each step's function in turn.
func TestMeasureAnotherQuantity(t *testing.T) {
	steps := countSequence + `  - kind: measure
    name: supply current
    meter: supply
    quantity: current
    meter_range: 100 mA
    settle: 1 ms
    readings: 2
    results: {mean: supply_current}
  - kind: measure
    name: supply voltage
    meter: supply
    quantity: voltage
    settle: 1 ms
    readings: 2
    results: {mean: supply_volts}
`
	st, seq := qFiles(t, qStation(`{gain: "3200", offset: "103", supply: "0.0125"}`, `{}`, twoSpecs), steps, countLimits)
	e := openEngine(t, st, seq)
	rec := e.Run(context.Background(), "RD-0003")
	if rec.Verdict != sequencer.Pass {
		t.Fatalf("verdict %s, fault %q, reasons %q", rec.Verdict, rec.Fault, rec.Reasons)
	}
	lastQBench.Lock()
	b := lastQBench.b
	lastQBench.Unlock()
	// The supply meter is the only meter the run opens.
	if len(b.functions) != 1 || strings.Join(b.functions[0], ",") != "current,voltage" {
		t.Errorf("the supply meter was set to %v, want current then voltage", b.functions)
	}
	// The fake meter reads 12.5 mA ± 1 µA in its current function, ±1 µV about
	// 0 in its voltage function: the means of two readings are exact.
	cur, volts := resultOf(t, rec, "supply_current"), resultOf(t, rec, "supply_volts")
	near(t, "supply current", cur.Value, 12.5e-3, 1e-12)
	near(t, "supply volts", volts.Value, 0, 1e-12)
	if cur.Unit != "A" || volts.Unit != "V" {
		t.Errorf("units %q and %q, want A and V", cur.Unit, volts.Unit)
	}
}

const loopRetrimSeq = `sequence:
  product: LT-420
  revision: A
limits: limits.yaml
ideal:
  gain: 0.8 mA/mV
  offset: 4 mA
  full_scale: 16 mA
meter:
  range: 100 mA
dacs:
  - name: zero
    adjusts: offset
    bits: 8
    lsb: 1 uA
    coding: twos_complement
    write: "TRIM Z {code}"
    read: "TRIM Z?"
steps:
  - kind: clear_trim
  - kind: sweep
    name: loop
    meter: supply
    from: 0 V
    to: 20 mV
    points: 5
    settle: 1 ms
    readings: 4
  - kind: fit
    sweep: loop
    results: {offset: loop_offset, gain_error: loop_gain_error, noise: loop_noise}
  - kind: measure
    name: supply
    meter: supply
    quantity: current
    settle: 1 ms
    readings: 4
    results: {mean: supply_current}
  - kind: trim
    fit: fit
    results: {zero: zero_code}
  - kind: retrim
    name: zero retrim
    dac: zero
    levels: [0 V]
    settle: 1 ms
    readings: 4
    within: 0.5 LSB
    results: {error: retrim_error}
`

// TestRetrimMeterNeedsASpecForItsQuantity: a re-trim of a current-output unit
// reads the loop current through its meter, so a meter with a volt spec alone
// cannot give its error an uncertainty: the station is refused before it runs,
// naming the re-trim, as it is for a sweep or a measure.
func TestRetrimMeterNeedsASpecForItsQuantity(t *testing.T) {
	volts := `{of_reading: 30 ppm, of_range: 4 ppm, range: 10 V, resolution: 1 uV}`
	st, seq := qFiles(t, qStation(`{}`, `{}`, volts), loopRetrimSeq, loopLimits)
	err := sequencer.CheckCaps(st, seq)
	if err == nil || !strings.Contains(err.Error(), "retrim") {
		t.Errorf("CheckCaps: %v, want the re-trim's current reading through a meter with no current spec refused", err)
	}
	st, seq = qFiles(t, qStation(`{}`, `{}`, twoSpecs), loopRetrimSeq, loopLimits)
	if err := sequencer.CheckCaps(st, seq); err != nil {
		t.Errorf("CheckCaps with a current spec: %v", err)
	}
}
