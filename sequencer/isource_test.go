package sequencer_test

// A current stimulus: a current-loop receiver card (4–20 mA in, volts out)
// driven by a fake current source, read by a fake voltmeter.

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

// ibench is one opened fake bench: the card's output is gain·I + offset volts
// while the source output is on, offset while it is off. log lists every call
// the engine made on the source, in order.
type ibench struct {
	mu      sync.Mutex
	amps    float64
	on      bool
	gain    float64 // V/A
	offset  float64 // V
	failAt  int     // the meter's Read call that fails (1-based); 0 = none
	reads   int
	log     []string
	limitV  float64 // compliance voltage programmed
	voltage bool    // the source is a plain voltage source (no CurrentSource)
}

func (b *ibench) add(format string, args ...any) {
	b.log = append(b.log, fmt.Sprintf(format, args...))
}

var lastIBench struct {
	sync.Mutex
	b *ibench
}

// ibenchDriver opens fake benches (ibench://source, ibench://meter). The card is
// described in the source's settings: gain (V/A) and offset (V); fail_at makes
// the meter's n-th Read fail; voltage: "yes" opens a source that cannot drive a
// current.
type ibenchDriver struct{}

func (ibenchDriver) Open(context.Context, *url.URL, instruments.Spec) (instruments.Instrument, error) {
	return nil, errors.New("ibench: open as a group")
}

func (ibenchDriver) OpenGroup(_ context.Context, specs []instruments.Spec) ([]instruments.Instrument, error) {
	b := &ibench{}
	out := make([]instruments.Instrument, len(specs))
	for i, s := range specs {
		switch what := strings.TrimPrefix(s.Address, "ibench://"); what {
		case "source":
			fmt.Sscan(s.Settings["gain"], &b.gain)
			fmt.Sscan(s.Settings["offset"], &b.offset)
			fmt.Sscan(s.Settings["fail_at"], &b.failAt)
			if s.Settings["voltage"] == "yes" {
				b.voltage = true
				out[i] = &iVoltSource{b}
			} else {
				out[i] = &iSource{b}
			}
		case "meter":
			out[i] = &iMeter{b}
		default:
			return nil, fmt.Errorf("ibench: no %q", what)
		}
	}
	lastIBench.Lock()
	lastIBench.b = b
	lastIBench.Unlock()
	return out, nil
}

func init() { instruments.Register("ibench", ibenchDriver{}) }

// iSource is a source that drives a current.
type iSource struct{ b *ibench }

var (
	_ instruments.Source        = (*iSource)(nil)
	_ instruments.CurrentSource = (*iSource)(nil)
)

func (s *iSource) Close() error { return nil }
func (s *iSource) SetLevel(_ context.Context, v float64) error {
	s.b.mu.Lock()
	defer s.b.mu.Unlock()
	s.b.add("SetLevel %g", v)
	return nil
}
func (s *iSource) SetOutput(_ context.Context, on bool) error {
	s.b.mu.Lock()
	defer s.b.mu.Unlock()
	s.b.on = on
	s.b.add("SetOutput %v", on)
	return nil
}
func (s *iSource) SetCompliance(_ context.Context, a float64) error {
	s.b.mu.Lock()
	defer s.b.mu.Unlock()
	s.b.add("SetCompliance %g", a)
	return nil
}
func (s *iSource) SetCurrent(_ context.Context, a float64) error {
	s.b.mu.Lock()
	defer s.b.mu.Unlock()
	s.b.amps = a
	s.b.add("SetCurrent %g", a)
	return nil
}
func (s *iSource) SetVoltageLimit(_ context.Context, v float64) error {
	s.b.mu.Lock()
	defer s.b.mu.Unlock()
	s.b.limitV = v
	s.b.add("SetVoltageLimit %g", v)
	return nil
}

// iVoltSource is a voltage source only.
type iVoltSource struct{ b *ibench }

func (s *iVoltSource) Close() error                                 { return nil }
func (s *iVoltSource) SetLevel(context.Context, float64) error      { return nil }
func (s *iVoltSource) SetOutput(context.Context, bool) error        { return nil }
func (s *iVoltSource) SetCompliance(context.Context, float64) error { return nil }

// iMeter reads the card's output voltage. Readings alternate ±1 µV about the
// value, so the mean of an even number of them is exact.
type iMeter struct{ b *ibench }

func (m *iMeter) Close() error { return nil }
func (m *iMeter) Read(_ context.Context, n int) ([]instruments.Reading, error) {
	m.b.mu.Lock()
	defer m.b.mu.Unlock()
	m.b.reads++
	if m.b.reads == m.b.failAt {
		return nil, errors.New("ibench meter: link dropped")
	}
	y := m.b.offset
	if m.b.on {
		y += m.b.gain * m.b.amps
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

// iStation is the fake bench's station file; source is the settings of the
// source role (a YAML flow mapping).
func iStation(source string) string {
	return `station:
  id: TL8
  name: Fake bench for a current stimulus

instruments:
  source:
    kind: current_source
    address: ibench://source
    asset: CAL-1
    cal_due: 2099-12-31
    accuracy: {of_reading: 100 ppm, of_range: 20 ppm, range: 24 mA}
    settings: ` + source + `
  meter:
    kind: meter
    address: ibench://meter
    asset: DMM-1
    cal_due: 2099-12-31
    accuracy: {of_reading: 30 ppm, of_range: 4 ppm, range: 10 V, resolution: 1 uV}

safety:
  source_rating: {voltage: 30 V, current: 30 mA}
  max_source_voltage: 12 V
  max_source_current: 24 mA
`
}

// receiverSequence is a current-loop receiver card: 4–20 mA in, 1–5 V out
// across its 250 Ω shunt, 250 V/A.
const receiverSequence = `sequence:
  product: LR-250
  revision: A
limits: limits.yaml
ideal:
  gain: 250 V/A
  offset: 0 V
meter:
  range: 10 V
steps:
  - kind: sweep
    name: loop
    from: 4 mA
    to: 20 mA
    points: 5
    settle: 1 ms
    readings: 4
  - kind: fit
    sweep: loop
    results: {offset: rx_offset, gain_error: rx_gain_error}
  - kind: measure
    name: midscale
    level: 12 mA
    settle: 1 ms
    readings: 4
    results: {error: rx_mid_error}
`

const receiverLimits = `limit_set:
  name: LR-250 limits
  revision: "1"
  product: LR-250
decision:
  coverage: 95.45 %
  rule: guarded
  guard_factor: 1
  statements: non-binary
  conditional_pass: review
  min_tur: 1
  tur_policy: warn
limits:
  - name: offset
    description: Output at zero loop current, ±10 mV.
    unit: mV
    uses: [rx_offset]
    tolerance: {lower: -10, upper: 10}
  - name: gain error
    description: Gain error, ±1 %.
    unit: "%"
    uses: [rx_gain_error]
    tolerance: {lower: -1, upper: 1}
`

// iLoad loads the receiver's files with sequence edited by edit (old → new
// pairs) and the station with the source's settings.
func iLoad(t *testing.T, source string, edits ...string) (*sequencer.Station, *sequencer.Sequence, error) {
	t.Helper()
	st, err := sequencer.ParseStation("station.yaml", []byte(iStation(source)))
	if err != nil {
		t.Fatal(err)
	}
	text := receiverSequence
	for i := 0; i+1 < len(edits); i += 2 {
		if !strings.Contains(text, edits[i]) {
			t.Fatalf("edit %q does not apply", edits[i])
		}
		text = strings.Replace(text, edits[i], edits[i+1], 1)
	}
	seq, err := sequencer.ParseSequence("seq.yaml", []byte(text), func(string) ([]byte, error) { return []byte(receiverLimits), nil })
	return st, seq, err
}

func iBench() *ibench {
	lastIBench.Lock()
	defer lastIBench.Unlock()
	return lastIBench.b
}

// A sweep of loop current on a card of 250.5 V/A and 2 mV offset: the levels
// are programmed in amperes on the current source, the fit's slope is in V/A,
// and the results are the card's own errors.
func TestCurrentStimulusSweep(t *testing.T) {
	st, seq, err := iLoad(t, "{gain: 250.5, offset: 0.002}")
	if err != nil {
		t.Fatal(err)
	}
	if err := sequencer.CheckCaps(st, seq); err != nil {
		t.Fatal(err)
	}
	e := openEngine(t, st, seq)
	rec := e.Run(context.Background(), "LR0001")
	if rec.Verdict != sequencer.Pass {
		t.Fatalf("verdict %s, fault %q, reasons %v", rec.Verdict, rec.Fault, rec.Reasons)
	}
	if rec.StimulusUnit != "A" || rec.ResponseUnit != "" {
		t.Errorf("record units: stimulus %q response %q, want \"A\" and \"\" (volts)", rec.StimulusUnit, rec.ResponseUnit)
	}
	// Levels 4, 8, 12, 16, 20 mA, in amperes.
	var got []float64
	for _, p := range rec.Sweeps[0].Points {
		got = append(got, p.Stimulus)
	}
	want := []float64{0.004, 0.008, 0.012, 0.016, 0.020}
	for i := range want {
		if i >= len(got) || math.Abs(got[i]-want[i]) > 1e-15 {
			t.Fatalf("stimuli %v, want %v", got, want)
		}
	}
	// The means are exact (readings ±1 µV about gain·I + offset), so the line
	// is the card's: slope 250.5 V/A, intercept 2 mV.
	f := rec.Fits[0]
	if math.Abs(f.Slope-250.5) > 1e-9 || math.Abs(f.Intercept-0.002) > 1e-12 {
		t.Errorf("fit slope %g V/A intercept %g V, want 250.5 V/A and 2 mV", f.Slope, f.Intercept)
	}
	// gain error = 250.5/250 − 1 = 0.002; offset = 2 mV − 0; at 12 mA the error
	// is 250.5·0.012 + 0.002 − 250·0.012 = 0.008 V.
	for _, c := range []struct {
		name string
		want float64
	}{{"rx_gain_error", 0.002}, {"rx_offset", 0.002}, {"rx_mid_error", 0.008}} {
		if r := resultOf(t, rec, c.name); math.Abs(r.Value-c.want) > 1e-9 {
			t.Errorf("%s = %g, want %g", c.name, r.Value, c.want)
		}
	}
	// The budget carries the source spec in amperes through the ideal gain. At
	// 20 mA: source ±(100 ppm·20 mA + 20 ppm·24 mA) = ±2.48 µA, ·250 V/A =
	// ±620 µV; meter at 5.0120 V: ±(30 ppm·5.012 V + 4 ppm·10 V) = ±190.36 µV;
	// resolution 1 µV, ±0.5 µV; each rectangular (÷√3):
	// u = √(620² + 190.36² + 0.5²)/√3 µV = 374.47… µV.
	p := rec.Sweeps[0].Points[4]
	wantU := math.Sqrt(620e-6*620e-6+190.36e-6*190.36e-6+0.5e-6*0.5e-6) / math.Sqrt(3)
	if math.Abs(p.USys-wantU) > 1e-9 {
		t.Errorf("u(spec) at 20 mA = %g V, want %g V", p.USys, wantU)
	}
	// The compliance voltage is the station's voltage cap, programmed before the
	// output is first switched on; no voltage level or current compliance is
	// ever programmed on a current source; the run ends output off at 0 A.
	b := iBench()
	log := strings.Join(b.log, "\n")
	limit, on := strings.Index(log, "SetVoltageLimit 12"), strings.Index(log, "SetOutput true")
	if limit < 0 || on < 0 || limit > on {
		t.Errorf("the compliance voltage (12 V) must be programmed before the output is on:\n%s", log)
	}
	if strings.Contains(log, "SetLevel") || strings.Contains(log, "SetCompliance") {
		t.Errorf("a current source was programmed as a voltage source:\n%s", log)
	}
	if n := len(b.log); n < 2 || b.log[n-2] != "SetOutput false" || b.log[n-1] != "SetCurrent 0" {
		t.Errorf("the run must end with the output off and 0 A:\n%s", log)
	}
}

// A run that faults mid-sweep leaves the current source off at 0 A.
func TestCurrentSourceOffAfterAFault(t *testing.T) {
	st, seq, err := iLoad(t, "{gain: 250, offset: 0, fail_at: 3}")
	if err != nil {
		t.Fatal(err)
	}
	e := openEngine(t, st, seq)
	rec := e.Run(context.Background(), "LR0002")
	if rec.Verdict != sequencer.Fault || !strings.Contains(rec.Fault, "link dropped") {
		t.Fatalf("verdict %s fault %q, want FAULT for the dropped meter", rec.Verdict, rec.Fault)
	}
	if !strings.Contains(rec.Fault, "at 12 mA") {
		t.Errorf("fault %q does not name the level in amperes (the third, 12 mA)", rec.Fault)
	}
	b := iBench()
	b.mu.Lock()
	defer b.mu.Unlock()
	if b.on || b.amps != 0 {
		t.Errorf("after the fault the source is on=%v at %g A, want off at 0 A", b.on, b.amps)
	}
	if n := len(b.log); n < 2 || b.log[n-2] != "SetOutput false" || b.log[n-1] != "SetCurrent 0" {
		t.Errorf("the run must end with the output off and 0 A:\n%s", strings.Join(b.log, "\n"))
	}
}

// The caps are checked at load, per step and positioned: a current beyond
// safety.max_source_current is refused before anything opens.
func TestCurrentStimulusCapsAtLoad(t *testing.T) {
	st, seq, err := iLoad(t, "{gain: 250}", "to: 20 mA", "to: 25 mA", "level: 12 mA", "level: -31 mA")
	if err != nil {
		t.Fatal(err)
	}
	err = sequencer.CheckCaps(st, seq)
	if !errors.Is(err, sequencer.ErrSafety) {
		t.Fatalf("got %v, want a safety refusal", err)
	}
	for _, want := range []string{
		`seq.yaml:11:5: step "loop" reaches 25 mA on the source, above the station cap of 24 mA (station.yaml safety.max_source_current)`,
		`seq.yaml:21:5: step "midscale" reaches -31 mA on the source, outside the source's own rating of ±30 mA (station.yaml safety.source_rating.current)`,
	} {
		if !strings.Contains(err.Error(), want) {
			t.Errorf("%v\ndoes not say %q", err, want)
		}
	}
	if _, err := sequencer.Open(context.Background(), sequencer.Config{Station: st, Sequence: seq}); !errors.Is(err, sequencer.ErrSafety) {
		t.Errorf("Open: got %v, want a safety refusal", err)
	}
	// Within the cap (24 mA exactly) it loads.
	st, seq, err = iLoad(t, "{gain: 250}", "to: 20 mA", "to: 24 mA")
	if err != nil {
		t.Fatal(err)
	}
	if err := sequencer.CheckCaps(st, seq); err != nil {
		t.Errorf("24 mA under a 24 mA cap: %v", err)
	}
}

// A level in the wrong quantity is refused at the value; a role bound as a
// voltage source, or a source that cannot drive a current, is refused.
func TestCurrentStimulusRefusals(t *testing.T) {
	_, _, err := iLoad(t, "{}", "to: 20 mA", "to: 5 V")
	if err == nil || !strings.Contains(err.Error(), `seq.yaml:14:9: "5 V" is a voltage (V): expected a current (A)`) ||
		!strings.Contains(err.Error(), "the ideal gain is per ampere") {
		t.Errorf("got %v, want the level refused at seq.yaml:14:9", err)
	}
	st, seq, err := iLoad(t, "{}")
	if err != nil {
		t.Fatal(err)
	}
	in := st.Instruments["source"]
	in.Kind = sequencer.VoltageSource
	st.Instruments["source"] = in
	if err := sequencer.CheckCaps(st, seq); !errors.Is(err, sequencer.ErrUnboundRole) || !strings.Contains(err.Error(), `uses the "source" role as a current_source`) {
		t.Errorf("got %v, want the voltage-source binding refused", err)
	}
	st, seq, err = iLoad(t, "{voltage: yes}")
	if err != nil {
		t.Fatal(err)
	}
	if _, err := sequencer.Open(context.Background(), sequencer.Config{Station: st, Sequence: seq}); err == nil || !strings.Contains(err.Error(), "is not a current source") {
		t.Errorf("got %v, want a source without current mode refused at open", err)
	}
}

// The README's current-stimulus example ("What the unit's response is", a text
// block since it is no edit of the demo sequence) loads as the body of a
// sequence file and runs on the fake loop-receiver bench.
func TestReadmeCurrentStimulusExample(t *testing.T) {
	var found []string
	for _, b := range fencedBlocks(t, "README.md", "## Writing a sequence", "text") {
		if strings.Contains(b.text, "gain: 250 V/A") {
			found = append(found, b.text)
		}
	}
	if len(found) != 1 {
		t.Fatalf("found %d text blocks with gain: 250 V/A under Writing a sequence, want 1", len(found))
	}
	text := "sequence:\n  product: LR-250\n  revision: A\nlimits: limits.yaml\n" + found[0]
	seq, err := sequencer.ParseSequence("seq.yaml", []byte(text), func(string) ([]byte, error) { return []byte(receiverLimits), nil })
	if err != nil {
		t.Fatal(err)
	}
	st, err := sequencer.ParseStation("station.yaml", []byte(iStation("{gain: 250}")))
	if err != nil {
		t.Fatal(err)
	}
	rec := openEngine(t, st, seq).Run(context.Background(), "LR0003")
	if rec.Verdict != sequencer.Pass || rec.StimulusUnit != "A" {
		t.Errorf("verdict %s (fault %q), stimulus unit %q; want PASS in A", rec.Verdict, rec.Fault, rec.StimulusUnit)
	}
}

// A current source's accuracy is a spec of a current range: a voltage range is
// refused at its line.
func TestCurrentSourceAccuracyInAmperes(t *testing.T) {
	text := strings.Replace(iStation("{}"), "range: 24 mA}", "range: 10 V}", 1)
	_, err := sequencer.ParseStation("station.yaml", []byte(text))
	if err == nil || !strings.Contains(err.Error(), "station.yaml:11:62:") || !strings.Contains(err.Error(), "expected a positive current range such as 10V or 100 mA, found a voltage") {
		t.Errorf("got %v, want the voltage range refused at station.yaml:11:62", err)
	}
}

// An offset DAC before the gain is input-referred: with a current stimulus its
// LSB is a current.
func TestCurrentStimulusBeforeGainDAC(t *testing.T) {
	dac := func(lsb string) string {
		return "meter:\n  range: 10 V\ndacs:\n  - {name: offset, adjusts: offset, bits: 12, lsb: " + lsb +
			`, no_correction: 2048, placement: before_gain, write: "TRIM OFS {code}", read: "TRIM OFS?"}` + "\n"
	}
	if _, _, err := iLoad(t, "{}", "meter:\n  range: 10 V\n", dac("40 nA")); err != nil {
		t.Errorf("an LSB of 40 nA: %v", err)
	}
	_, _, err := iLoad(t, "{}", "meter:\n  range: 10 V\n", dac("10 uV"))
	if err == nil || !strings.Contains(err.Error(), "seq.yaml:11:52:") || !strings.Contains(err.Error(), "expected a current (A)") {
		t.Errorf("got %v, want an LSB in volts refused at seq.yaml:11:52", err)
	}
}
