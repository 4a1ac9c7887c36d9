package sequencer_test

// The soak step on a fake chamber: the three-channel fake bench of
// channels_test.go plus a chamber that answers a scripted list of temperatures
// and keeps the bench's (simulated) time.

import (
	"context"
	"errors"
	"fmt"
	"math"
	"net/url"
	"slices"
	"strings"
	"sync"
	"testing"
	"time"

	"trimline/instruments"
	"trimline/sequencer"
)

// chamberFake is the fake chamber's state; one test at a time uses it.
type chamberFake struct {
	mu     sync.Mutex
	now    time.Time
	script []float64 // the temperatures read, in order; the last repeats
	reads  int
	sets   []float64 // every set point programmed, in order
	// cancel is called at the cancelRead-th read (1-based; 0 = never).
	cancelRead int
	cancel     func()
}

var chamber = &chamberFake{}

func (c *chamberFake) reset(script ...float64) {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.now = time.Date(2026, 12, 2, 8, 0, 0, 0, time.UTC)
	c.script, c.reads, c.sets, c.cancelRead, c.cancel = script, 0, nil, 0, nil
}

type chamberDriver struct{}

func (chamberDriver) Open(ctx context.Context, u *url.URL, s instruments.Spec) (instruments.Instrument, error) {
	if u.Host != "chamber" {
		return nil, fmt.Errorf("soakfake: no instrument %q", u.Host)
	}
	return chamberInst{}, nil
}

func init() { instruments.Register("soakfake", chamberDriver{}) }

type chamberInst struct{}

func (chamberInst) Close() error { return nil }
func (chamberInst) SetTemperature(ctx context.Context, c float64) error {
	if err := ctx.Err(); err != nil {
		return err // a real driver refuses to write on an expired context
	}
	chamber.mu.Lock()
	defer chamber.mu.Unlock()
	chamber.sets = append(chamber.sets, c)
	return nil
}
func (chamberInst) Temperature(ctx context.Context) (float64, error) {
	chamber.mu.Lock()
	defer chamber.mu.Unlock()
	i := min(chamber.reads, len(chamber.script)-1)
	chamber.reads++
	if chamber.reads == chamber.cancelRead {
		chamber.cancel()
		return 0, ctx.Err()
	}
	return chamber.script[i], nil
}
func (chamberInst) Clock() instruments.Clock { return chamberClock{} }

// chamberClock is the bench's time: Sleep moves it on at once.
type chamberClock struct{}

func (chamberClock) Now() time.Time {
	chamber.mu.Lock()
	defer chamber.mu.Unlock()
	return chamber.now
}
func (chamberClock) Sleep(ctx context.Context, d time.Duration) error {
	if err := ctx.Err(); err != nil {
		return err
	}
	chamber.mu.Lock()
	defer chamber.mu.Unlock()
	chamber.now = chamber.now.Add(d)
	return nil
}

// soakStation is the three-channel station with a chamber and a safe
// temperature of 22 °C (not the 25 °C default, so the test sees it was used).
var soakStation = triStation + `  safe_temperature: 22 °C
  min_temperature: -40 °C
  max_temperature: 125 °C
`

// withChamber adds the chamber role to a station file.
func withChamber(st string) string {
	return strings.Replace(st, "  mux: {kind: switch", "  chamber: {kind: thermal, address: \"soakfake://chamber\", asset: CH1}\n  mux: {kind: switch", 1)
}

// withSoak puts soak (a step's lines, indented as a list entry) after the
// identify step of the three-channel sequence.
func withSoak(soak string) string {
	return strings.Replace(triSequence, "    serial_query: \"SN?\"\n", "    serial_query: \"SN?\"\n"+soak, 1)
}

const hotSoak = `  - kind: soak
    name: hot soak
    thermal: chamber
    set_point: 85 °C
    band: 0.5 °C
    dwell: 30 s
    timeout: 5 min
    every: 10 s
`

func soakConfig(t *testing.T, station, seq string) sequencer.Config {
	t.Helper()
	st, err := sequencer.ParseStation("soak-station.yaml", []byte(station))
	if err != nil {
		t.Fatal(allErrs(err))
	}
	sq, err := sequencer.ParseSequence("tri3-sequence.yaml", []byte(seq), triFiles(seq, triLimits))
	if err != nil {
		t.Fatal(allErrs(err))
	}
	return sequencer.Config{Station: st, Sequence: sq, Operator: "test", Software: "test"}
}

// TestSoakStableAfterOvershoot: the chamber is read every 10 s from the set
// point on (t = 0 s), band ±0.5 °C about 85 °C, dwell 30 s. The script, hand
// worked:
//
//	t/s   0     10    20    30    40    50    60    70
//	°C    25    60    84.8  86.0  85.3  84.9  85.1  85.0
//	band  out   out   in    out   in    in    in    in
//
// 84.8 enters the band at 20 s but the overshoot to 86.0 leaves it at 30 s; the
// last entry is at 40 s, and at 70 s the reads have been in the band for 30 s:
// stable at 40 s, ended at 70 s, 8 reads. Over the dwell (40…70 s):
// mean = (85.3 + 84.9 + 85.1 + 85.0)/4 = 85.075 °C; deviations 0.225, −0.175,
// 0.025, −0.075, squares summing to 0.0875, sd = √(0.0875/3) = 0.170783 °C.
// Every sweep after the soak records 85.075 °C; the chamber goes back to the
// station's 22 °C when the run ends. The replay takes the soak from the record
// and differs in nothing.
func TestSoakStableAfterOvershoot(t *testing.T) {
	tri.reset()
	chamber.reset(25, 60, 84.8, 86.0, 85.3, 84.9, 85.1, 85.0, 99)
	start := chamber.now
	cfg := soakConfig(t, withChamber(soakStation), withSoak(hotSoak))
	e, err := sequencer.Open(context.Background(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	defer e.Close()
	rec := e.Run(context.Background(), "TRI-00001")
	if rec.Verdict == sequencer.Fault || rec.Verdict == sequencer.Aborted {
		t.Fatalf("verdict %s: %s", rec.Verdict, rec.Fault)
	}
	if len(rec.Soaks) != 1 {
		t.Fatalf("%d soaks recorded, want 1", len(rec.Soaks))
	}
	k := rec.Soaks[0]
	if k.Step != "hot soak" || k.Role != "chamber" || k.SetPoint != 85 || k.Band != 0.5 || k.Dwell != 30 || k.TimedOut {
		t.Errorf("soak %+v", k)
	}
	if got, want := k.Stable.Sub(start), 40*time.Second; got != want {
		t.Errorf("stable after %s, want %s", got, want)
	}
	if got, want := k.Ended.Sub(start), 70*time.Second; got != want {
		t.Errorf("ended after %s, want %s", got, want)
	}
	if len(k.Readings) != 8 {
		t.Errorf("%d reads, want 8", len(k.Readings))
	}
	if math.Abs(k.MeanC-85.075) > 1e-9 || math.Abs(k.SDC-0.170783) > 1e-6 {
		t.Errorf("mean %.9g sd %.9g, want 85.075 and 0.170783", k.MeanC, k.SDC)
	}
	if len(rec.Sweeps) == 0 {
		t.Fatal("no sweeps")
	}
	for _, sw := range rec.Sweeps {
		if !sw.TempKnown || sw.TempC != k.MeanC {
			t.Errorf("sweep %s@%s: temperature %v (known %v), want %v", sw.Name, sw.Channel, sw.TempC, sw.TempKnown, k.MeanC)
		}
	}
	chamber.mu.Lock()
	sets := slices.Clone(chamber.sets)
	chamber.mu.Unlock()
	if want := []float64{85, 22}; !slices.Equal(sets, want) {
		t.Errorf("chamber set to %v, want %v (the set point, then the safe temperature)", sets, want)
	}

	re, err := sequencer.Replay(cfg, rec)
	if err != nil {
		t.Fatal(err)
	}
	if d := sequencer.Differences(rec, re); len(d) > 0 {
		t.Errorf("replay differs: %q", d)
	}
	if len(re.Soaks) != 1 || re.Soaks[0].MeanC != k.MeanC {
		t.Errorf("replayed soaks %+v", re.Soaks)
	}
	for _, sw := range re.Sweeps {
		if !sw.TempKnown || sw.TempC != k.MeanC {
			t.Errorf("replayed sweep %s@%s: temperature %v (known %v)", sw.Name, sw.Channel, sw.TempC, sw.TempKnown)
		}
	}
}

// A soak that reads the unit's own sensor keeps its reply (" 84.93\r\n", white
// space trimmed) beside every chamber read; the TUR prediction runs the soak
// on paper, touching no instrument.
func TestSoakUnitSensorAndPrediction(t *testing.T) {
	tri.reset()
	chamber.reset(85)
	soak := hotSoak + "    unit_sensor: {port: dut, query: \"TEMP?\"}\n"
	cfg := soakConfig(t, withChamber(soakStation), withSoak(soak))
	e, err := sequencer.Open(context.Background(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	defer e.Close()
	rec := e.Run(context.Background(), "TRI-00001")
	if len(rec.Soaks) != 1 {
		t.Fatalf("verdict %s (%s), %d soaks", rec.Verdict, rec.Fault, len(rec.Soaks))
	}
	// In the band from the first read at 0 s: stable at the read at 30 s, 4 reads.
	if rs := rec.Soaks[0].Readings; len(rs) != 4 {
		t.Errorf("%d reads, want 4", len(rs))
	}
	for i, r := range rec.Soaks[0].Readings {
		if r.UnitC == nil || *r.UnitC != 84.93 {
			t.Errorf("read %d: unit sensor %v, want 84.93", i, r.UnitC)
		}
	}
	// The sweeps after it are at the unit's own temperature (what its firmware
	// corrects by), not the chamber's.
	if m := rec.Soaks[0].UnitMeanC; m == nil || math.Abs(*m-84.93) > 1e-9 {
		t.Errorf("unit mean %v, want 84.93", m)
	}
	for _, sw := range rec.Sweeps {
		if !sw.TempKnown || math.Abs(sw.TempC-84.93) > 1e-9 {
			t.Errorf("sweep %q at %v °C (known %v), want the unit's 84.93 °C", sw.Name, sw.TempC, sw.TempKnown)
		}
	}
	chamber.mu.Lock()
	reads := chamber.reads
	chamber.mu.Unlock()
	if p := sequencer.PredictUncertainty(cfg.Station, cfg.Sequence); len(p) == 0 {
		t.Error("no prediction")
	}
	chamber.mu.Lock()
	after := chamber.reads
	chamber.mu.Unlock()
	if after != reads {
		t.Errorf("the prediction read the chamber %d times", after-reads)
	}
}

// TestSoakTimeoutFaults: a chamber swinging 84 °C / 86 °C never enters the
// ±0.5 °C band. Read every 10 s, the read at 120 s is the first at the 2 min
// timeout: FAULT naming the step, the set point and the last read (the 13th,
// t = 120 s, index 12: 84 + 2·(12 mod 2) = 84 °C), the source output off and the chamber back at the
// station's safe 22 °C. A later step's sweep (after the soak) never ran.
func TestSoakTimeoutFaults(t *testing.T) {
	tri.reset()
	var swing []float64
	for i := range 13 {
		swing = append(swing, 84+2*float64(i%2))
	}
	chamber.reset(swing...)
	soak := strings.Replace(hotSoak, "timeout: 5 min", "timeout: 2 min", 1)
	// The soak after the pre-trim sweep, so the source was driven before it.
	seq := strings.Replace(triSequence, "  - kind: fit\n    name: pre fit\n", soak+"  - kind: fit\n    name: pre fit\n", 1)
	cfg := soakConfig(t, withChamber(soakStation), seq)
	e, err := sequencer.Open(context.Background(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	defer e.Close()
	rec := e.Run(context.Background(), "TRI-00001")
	if rec.Verdict != sequencer.Fault {
		t.Fatalf("verdict %s, want FAULT", rec.Verdict)
	}
	for _, w := range []string{`step "hot soak"`, "85 °C", "last read 84 °C"} {
		if !strings.Contains(rec.Fault, w) {
			t.Errorf("fault %q does not say %q", rec.Fault, w)
		}
	}
	if len(rec.Soaks) != 1 || !rec.Soaks[0].TimedOut || len(rec.Soaks[0].Readings) != 13 {
		t.Errorf("soaks %+v, want one timed out after 13 reads", rec.Soaks)
	}
	tri.mu.Lock()
	on := tri.on
	tri.mu.Unlock()
	chamber.mu.Lock()
	sets := slices.Clone(chamber.sets)
	chamber.mu.Unlock()
	if on {
		t.Error("source output left on")
	}
	if want := []float64{85, 22}; !slices.Equal(sets, want) {
		t.Errorf("chamber set to %v, want %v", sets, want)
	}
	for _, sw := range rec.Sweeps {
		if sw.TempKnown {
			t.Errorf("sweep %s@%s has a temperature, but no soak finished before it", sw.Name, sw.Channel)
		}
	}
}

// TestSoakAbortedChamberSafe: a run cancelled during the soak (the chamber's
// second read cancels the context, as Ctrl-C would) ends ABORTED with the
// chamber set to the safe temperature through a context of its own (the fake
// refuses a write on an expired context).
func TestSoakAbortedChamberSafe(t *testing.T) {
	tri.reset()
	chamber.reset(25, 40, 60)
	cfg := soakConfig(t, withChamber(soakStation), withSoak(hotSoak))
	e, err := sequencer.Open(context.Background(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	defer e.Close()
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	chamber.mu.Lock()
	chamber.cancelRead, chamber.cancel = 2, cancel
	chamber.mu.Unlock()
	rec := e.Run(ctx, "TRI-00001")
	if rec.Verdict != sequencer.Aborted {
		t.Fatalf("verdict %s (%s), want ABORTED", rec.Verdict, rec.Fault)
	}
	chamber.mu.Lock()
	sets := slices.Clone(chamber.sets)
	chamber.mu.Unlock()
	if want := []float64{85, 22}; !slices.Equal(sets, want) {
		t.Errorf("chamber set to %v, want %v", sets, want)
	}
}

// TestSoakSetPointBeyondCap: a soak at 130 °C on a station capped at 125 °C is
// refused when the files meet, at the set_point's line: the sequence's steps:
// is line 16, identify 17–18, the soak begins at 19 and its set_point is line
// 22, its value at column 16 (after "    set_point: ").
func TestSoakSetPointBeyondCap(t *testing.T) {
	cfg := soakConfig(t, withChamber(soakStation), withSoak(strings.Replace(hotSoak, "85 °C", "130 °C", 1)))
	err := sequencer.CheckCaps(cfg.Station, cfg.Sequence)
	if !errors.Is(err, sequencer.ErrSafety) {
		t.Fatalf("CheckCaps: %v, want a safety refusal", err)
	}
	for _, w := range []string{"tri3-sequence.yaml:22:16: ", `step "hot soak" sets the chamber to 130 °C`, "-40 °C to 125 °C"} {
		if !strings.Contains(err.Error(), w) {
			t.Errorf("CheckCaps: %v\nwant %q", err, w)
		}
	}
	if _, err := sequencer.Open(context.Background(), cfg); !errors.Is(err, sequencer.ErrSafety) {
		t.Errorf("Open: %v, want a safety refusal", err)
	}
}

// The station's temperature settings: a safe temperature outside the caps, a
// minimum above the maximum and a temperature without °C are refused at their
// keys (the station file with the chamber has 11 lines, so the safety keys
// added are lines 12 and 13, values at column 21 after "  safe_temperature: "
// and 20 after "  max_temperature: "); without safe_temperature the default is
// 25 °C.
func TestStationTemperatures(t *testing.T) {
	st, err := sequencer.ParseStation("s.yaml", []byte(withChamber(triStation)))
	if err != nil {
		t.Fatal(allErrs(err))
	}
	if st.SafeTemperature != 25 || st.HasMaxTemperature || st.HasMinTemperature {
		t.Errorf("defaults: safe %v, caps %v %v", st.SafeTemperature, st.HasMinTemperature, st.HasMaxTemperature)
	}
	for _, c := range []struct{ add, want string }{
		{"  safe_temperature: 30 °C\n  max_temperature: 28 °C\n", "s.yaml:12:21: the safe temperature 30 °C is outside the station's temperature caps (at most 28 °C)"},
		{"  min_temperature: 50 °C\n  max_temperature: 40 °C\n", "s.yaml:13:20: expected max_temperature above min_temperature (50 °C), found 40 °C"},
		{"  safe_temperature: 25 V\n", "s.yaml:12:21: expected a temperature such as 25 °C"},
	} {
		_, err := sequencer.ParseStation("s.yaml", []byte(withChamber(triStation)+c.add))
		if err == nil || !strings.Contains(allErrs(err), c.want) {
			t.Errorf("%q: %v, want %q", c.add, err, c.want)
		}
	}
}

// At the normal end of a run the engine sets the safe temperature (22 °C here)
// and reads the chamber once more: the script's last read repeats, so a
// chamber still at 85 °C is 63 °C from 22 °C, beyond the 5 °C handling band,
// and the record notes it; one at 24.5 °C (2.5 °C away) or 17 °C (exactly 5 °C
// away, on the band's edge) gives no note.
func TestHandlingBandAtTheEnd(t *testing.T) {
	for _, c := range []struct {
		last float64
		note string
	}{
		{85, "chamber at 85.0 °C: wait before opening the fixture (safe temperature 22 °C, handling band ±5 °C)"},
		{24.5, ""},
		{17, ""},
	} {
		tri.reset()
		chamber.reset(25, 60, 84.8, 86.0, 85.3, 84.9, 85.1, 85.0, c.last)
		cfg := soakConfig(t, withChamber(soakStation), withSoak(hotSoak))
		e, err := sequencer.Open(context.Background(), cfg)
		if err != nil {
			t.Fatal(err)
		}
		rec := e.Run(context.Background(), "TRI-00001")
		e.Close()
		if rec.Verdict == sequencer.Fault || rec.Verdict == sequencer.Aborted {
			t.Fatalf("verdict %s: %s", rec.Verdict, rec.Fault)
		}
		var want []string
		if c.note != "" {
			want = []string{c.note}
		}
		if !slices.Equal(rec.Notes, want) {
			t.Errorf("chamber at %v °C at the end: notes %q, want %q", c.last, rec.Notes, want)
		}
	}
}

// safety.handling_band: 5 °C by default, a number of its own, refused at its
// key when it is no positive temperature (line 12, value at column 18 after
// "  handling_band: ").
func TestStationHandlingBand(t *testing.T) {
	st, err := sequencer.ParseStation("s.yaml", []byte(withChamber(triStation)))
	if err != nil {
		t.Fatal(allErrs(err))
	}
	if st.HandlingBand != 5 {
		t.Errorf("default handling band %v, want 5", st.HandlingBand)
	}
	st, err = sequencer.ParseStation("s.yaml", []byte(withChamber(triStation)+"  handling_band: 3 °C\n"))
	if err != nil {
		t.Fatal(allErrs(err))
	}
	if st.HandlingBand != 3 {
		t.Errorf("handling band %v, want 3", st.HandlingBand)
	}
	for _, add := range []string{"  handling_band: 0 °C\n", "  handling_band: 5 V\n"} {
		_, err := sequencer.ParseStation("s.yaml", []byte(withChamber(triStation)+add))
		if want := "s.yaml:12:18: expected a positive temperature difference such as 5 °C"; err == nil || !strings.Contains(allErrs(err), want) {
			t.Errorf("%q: %v, want %q", add, err, want)
		}
	}
}
