package sequencer_test

import (
	"context"
	"errors"
	"fmt"
	"math"
	"net/url"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"trimline/instruments"
	"trimline/instruments/files"
	"trimline/instruments/sim"
	"trimline/sequencer"
)

// unevenDriver opens a simulated bench (addresses uneven://source etc.) whose
// offset DAC has uneven steps: bit 8 weighs 258 LSB instead of 256, so every
// code with bit 8 set (1792..2047 among others) sits 2 LSB (24.4 µV) above where
// the nominal step puts it. The simulated card applies the nominal step; the
// meter adds the rest to each reading after the simulator has rounded it to its
// 1 µV resolution.
type unevenDriver struct{}

// unevenBit8 is the extra weight of bit 8 of the offset DAC, in LSB of 12.2 µV.
const unevenBit8 = 2

// unevenState is the offset code the card holds and the codes written to it.
var unevenState struct {
	sync.Mutex
	code   int
	writes []int
}

func unevenExtra(code int) float64 {
	if code&(1<<8) != 0 {
		return unevenBit8 * 12.2e-6
	}
	return 0
}

func (unevenDriver) Open(ctx context.Context, u *url.URL, s instruments.Spec) (instruments.Instrument, error) {
	return nil, errors.New("uneven: open as a group")
}

func (unevenDriver) OpenGroup(ctx context.Context, specs []instruments.Spec) ([]instruments.Instrument, error) {
	simSpecs := make([]instruments.Spec, len(specs))
	for i, s := range specs {
		s.Address = strings.Replace(s.Address, "uneven://", "sim://", 1)
		simSpecs[i] = s
	}
	b, err := sim.NewBench(simSpecs)
	if err != nil {
		return nil, err
	}
	unevenState.Lock()
	unevenState.code, unevenState.writes = 2048, nil
	unevenState.Unlock()
	out := make([]instruments.Instrument, len(specs))
	for i, s := range specs {
		switch s.Role {
		case "source":
			out[i] = b.Source()
		case "meter":
			out[i] = &unevenMeter{b.Meter()}
		case "dut":
			out[i] = &unevenDUT{b.DUT()}
		}
	}
	return out, nil
}

func init() { instruments.Register("uneven", unevenDriver{}) }

type unevenMeter struct{ *sim.Meter }

func (m *unevenMeter) Read(ctx context.Context, n int) ([]instruments.Reading, error) {
	rs, err := m.Meter.Read(ctx, n)
	unevenState.Lock()
	extra := unevenExtra(unevenState.code)
	unevenState.Unlock()
	for i := range rs {
		rs[i].Value += extra
	}
	return rs, err
}

type unevenDUT struct{ *sim.DUT }

func (d *unevenDUT) Command(ctx context.Context, line string) error {
	if w, ok := strings.CutPrefix(line, "TRIM OFS "); ok {
		c, err := strconv.Atoi(w)
		if err == nil {
			unevenState.Lock()
			unevenState.code = c
			unevenState.writes = append(unevenState.writes, c)
			unevenState.Unlock()
		}
	}
	return d.DUT.Command(ctx, line)
}

// retrimStep is the re-trim the tests insert after the demo's trim, before its
// store.
const retrimStep = `  - kind: retrim
    name: offset retrim
    dac: offset
    levels: [0 V]
    settle: 50 ms
    readings: 4
    within: 0.5 LSB
    results: {code: offset_code_final, error: offset_error_final, passes: offset_passes}

`

const storeAnchor = "  - kind: store"

// retrimText is the demo sequence with step inserted before anchor.
func retrimText(t *testing.T, step, anchor string) string {
	t.Helper()
	text := demoFile(t, "brx200-sequence.yaml")
	if !strings.Contains(text, anchor) {
		t.Fatalf("demo sequence has no %q", anchor)
	}
	return strings.Replace(text, anchor, step+anchor, 1)
}

// retrimBench loads the demo files with step before the demo's store on the
// uneven bench: an ideal bench whose unit has a 3.1 mV output offset and no gain
// error, noise or settling to speak of.
func retrimBench(t *testing.T, step string) (*sequencer.Station, *sequencer.Sequence, *sequencer.Engine) {
	t.Helper()
	st, err := sequencer.ParseStation("brx200-station.yaml", []byte(demoFile(t, "brx200-station.yaml")))
	if err != nil {
		t.Fatal(err)
	}
	set := ideal(map[string]string{"offset": "3.1 mV", "gain_error": "0 ppm"})
	for role, in := range st.Instruments {
		in.Address = strings.Replace(in.Address, "sim://", "uneven://", 1)
		in.Settings = set[role]
		st.Instruments[role] = in
	}
	seq, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(retrimText(t, step, storeAnchor)), demoReader(t, nil))
	if err != nil {
		t.Fatal(err)
	}
	return st, seq, openEngine(t, st, seq)
}

func replayed(t *testing.T, st *sequencer.Station, seq *sequencer.Sequence, rec *sequencer.Record) []string {
	t.Helper()
	again, err := sequencer.Replay(sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test"}, rec)
	if err != nil {
		t.Fatal(err)
	}
	return sequencer.Differences(rec, again)
}

// Hand-worked, LSB = 12.2 µV, the meter rounding to 1 µV before the uneven bit's
// 24.4 µV is added. The open-loop trim writes 2048 − 3.1 mV/12.2 µV = 1793.90 →
// 1794, where the nominal steps leave 3.1 mV − 254·12.2 µV = 1.2 µV (read 1 µV),
// but bit 8 adds 24.4 µV: 25.4 µV, 2.08 LSB off.
//
//	pass 1: code 1794, error 25.4 µV; nominal 12.2 µV/code: next 1794 − round(2.082) = 1792
//	pass 2: code 1792, error −23.2 µV (read −23) + 24.4 = 1.4 µV ≤ 6.1 µV: within.
//	        secant (1.4 − 25.4)/(1792 − 1794) = 12.0 µV/code, 0.98 × nominal: measured.
//
// A measure step at the same level after it reads the same readings: its error
// and uncertainty are the re-trim's final error's.
func TestRetrimConvergesOnUnevenDAC(t *testing.T) {
	st, seq, e := retrimBench(t, retrimStep+`  - kind: measure
    name: zero after retrim
    level: 0 V
    settle: 50 ms
    readings: 4
    results: {error: zero_error_after}

`)
	rec := e.Run(context.Background(), "BRX-00014")
	if rec.Verdict != sequencer.Pass {
		t.Fatalf("verdict %s, fault %q, reasons %q", rec.Verdict, rec.Fault, rec.Reasons)
	}
	if n := len(rec.Retrims); n != 2 {
		t.Fatalf("%d passes, want 2: %+v", n, rec.Retrims)
	}
	p1, p2 := rec.Retrims[0], rec.Retrims[1]
	if p1.Code != 1794 || p1.Next != 1792 || p1.Within || p1.Measured || p1.Pass != 1 || p1.Step != "offset retrim" || p1.DAC != "offset" {
		t.Errorf("pass 1: %+v, want code 1794 → 1792, nominal, not within", p1)
	}
	near(t, "pass 1 error", p1.Error, 25.4e-6, 1e-9)
	near(t, "pass 1 sensitivity (nominal)", p1.Sensitivity, 12.2e-6, 1e-12)
	if p2.Code != 1792 || p2.Next != 1792 || !p2.Within || !p2.Measured {
		t.Errorf("pass 2: %+v, want code 1792, within, measured", p2)
	}
	near(t, "pass 2 error", p2.Error, 1.4e-6, 1e-9)
	near(t, "pass 2 sensitivity (measured)", p2.Sensitivity, 12.0e-6, 1e-9)
	if !(p2.ErrorU > 0) {
		t.Errorf("pass 2 error u = %g, want > 0", p2.ErrorU)
	}
	near(t, "final code", resultOf(t, rec, "offset_code_final").Value, 1792, 0)
	near(t, "final error", resultOf(t, rec, "offset_error_final").Value, 1.4e-6, 1e-9)
	near(t, "passes", resultOf(t, rec, "offset_passes").Value, 2, 0)
	if r := resultOf(t, rec, "offset_error_final"); !(r.Unc.Expanded > 0) || r.Stage != sequencer.Adjustment {
		t.Errorf("final error: U = %g, stage %v; want U > 0 at adjustment", r.Unc.Expanded, r.Stage)
	}
	a, b := resultOf(t, rec, "offset_error_final"), resultOf(t, rec, "zero_error_after")
	near(t, "measure's error", b.Value, a.Value, 1e-15)
	near(t, "measure's u(error)", b.Unc.Std, a.Unc.Std, 1e-15)
	near(t, "pass 2 u(error)", p2.ErrorU, a.Unc.Std, 1e-15)
	// Every write went through the trim's path and was read back: the DAC holds
	// the final code, and the record's trim says so (and that it was stored).
	unevenState.Lock()
	writes := append([]int(nil), unevenState.writes...)
	unevenState.Unlock()
	if want := []int{2048, 1794, 1792}; fmt.Sprint(writes) != fmt.Sprint(want) {
		t.Errorf("offset writes %v, want %v", writes, want)
	}
	for _, tr := range rec.Trims {
		if tr.DAC == "offset" && (tr.Code != 1792 || tr.Readback != 1792 || !tr.Written || !tr.Stored) {
			t.Errorf("offset trim in the record: %+v, want code and read-back 1792, written, stored", tr)
		}
	}
	// The readings are kept as one sweep a pass, stage adjustment.
	for i := 1; i <= 2; i++ {
		name := fmt.Sprintf("offset retrim pass %d", i)
		found := false
		for _, sw := range rec.Sweeps {
			if sw.Name == name {
				found = true
				if len(sw.Points) != 1 || len(sw.Points[0].Readings) != 4 || sw.Stage != sequencer.Adjustment {
					t.Errorf("%s: %d points, stage %v", name, len(sw.Points), sw.Stage)
				}
			}
		}
		if !found {
			t.Errorf("no sweep %q in the record", name)
		}
	}
	if d := replayed(t, st, seq, rec); len(d) > 0 {
		t.Errorf("replay differs: %s", strings.Join(d, "; "))
	}
	// A pass whose stored choice the readings do not support is a replay difference.
	rec.Retrims[0].Next = 1793
	if d := replayed(t, st, seq, rec); len(d) != 1 || !strings.Contains(d[0], "offset retrim pass 1") || !strings.Contains(d[0], "next code: recorded 1793") {
		t.Errorf("replay of a tampered pass: %q, want one difference naming pass 1's next code", d)
	}
}

// Hand-worked with a bound of 0.5 µV (tighter than the card can meet), after
// passes 1 and 2 as above (1.4 µV misses the bound):
//
//	pass 2: next 1792 − round(1.4/12.0) = 1792, tried: the best code's (1792, +1.4 µV)
//	        neighbour that lowers the error, 1791
//	pass 3: code 1791 (bit 8 clear), error −35.4 µV read −35 µV; secant
//	        (−35 − 1.4)/(1791 − 1792) = 36.4 µV/code, 2.98 × nominal: measured;
//	        next 1791 − round(−0.96) = 1792, tried; the best's neighbour 1791 tried: stop.
//
// The best code, 1792, is written back, and with no error result declared the
// unit fails with the reason.
func TestRetrimBestCodeWrittenBack(t *testing.T) {
	step := strings.Replace(strings.Replace(retrimStep, "within: 0.5 LSB", "within: 0.5 uV\n    max_passes: 3", 1),
		"results: {code: offset_code_final, error: offset_error_final, passes: offset_passes}", "results: {code: offset_code_final}", 1)
	st, seq, e := retrimBench(t, step)
	rec := e.Run(context.Background(), "BRX-00014")
	if rec.Verdict != sequencer.Fail {
		t.Fatalf("verdict %s, fault %q, reasons %q", rec.Verdict, rec.Fault, rec.Reasons)
	}
	var codes []int
	for _, p := range rec.Retrims {
		codes = append(codes, p.Code)
	}
	if fmt.Sprint(codes) != "[1794 1792 1791]" {
		t.Fatalf("codes tried %v, want [1794 1792 1791]", codes)
	}
	p3 := rec.Retrims[2]
	near(t, "pass 3 error", p3.Error, -35e-6, 1e-9)
	near(t, "pass 3 sensitivity", p3.Sensitivity, 36.4e-6, 1e-9)
	if !p3.Measured || p3.Within || p3.Next != 1792 || rec.Retrims[1].Next != 1791 {
		t.Errorf("passes 2, 3: %+v %+v; want 1791 next after pass 2, 1792 left after pass 3", rec.Retrims[1], p3)
	}
	unevenState.Lock()
	writes := append([]int(nil), unevenState.writes...)
	unevenState.Unlock()
	if want := "[2048 1794 1792 1791 1792]"; fmt.Sprint(writes) != want {
		t.Errorf("offset writes %v, want %s", writes, want)
	}
	near(t, "final code", resultOf(t, rec, "offset_code_final").Value, 1792, 0)
	found := false
	for _, r := range rec.Reasons {
		if strings.HasPrefix(r, "re-trim of offset: best error 1.4") && strings.Contains(r, "after 3 passes, bound 500") {
			found = true
		}
	}
	if !found {
		t.Errorf("reasons %q, want the re-trim's", rec.Reasons)
	}
	if d := replayed(t, st, seq, rec); len(d) > 0 {
		t.Errorf("replay differs: %s", strings.Join(d, "; "))
	}
}

// With one pass allowed the open-loop code's 25.4 µV stands; an error result is
// declared, so the limits judge it and the step adds no reason of its own.
func TestRetrimOnePassLeavesItToTheLimits(t *testing.T) {
	step := strings.Replace(retrimStep, "within: 0.5 LSB", "within: 0.5 LSB\n    max_passes: 1", 1)
	_, _, e := retrimBench(t, step)
	rec := e.Run(context.Background(), "BRX-00014")
	if len(rec.Retrims) != 1 || rec.Retrims[0].Code != 1794 || rec.Retrims[0].Next != 1794 || rec.Retrims[0].Within {
		t.Fatalf("passes %+v, want one at 1794, left there", rec.Retrims)
	}
	near(t, "final error", resultOf(t, rec, "offset_error_final").Value, 25.4e-6, 1e-9)
	near(t, "passes", resultOf(t, rec, "offset_passes").Value, 1, 0)
	for _, r := range rec.Reasons {
		if strings.Contains(r, "re-trim") {
			t.Errorf("reason %q: the error result is declared, the limits judge it", r)
		}
	}
}

func TestRetrimTimingCapsAndPrediction(t *testing.T) {
	seq, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(retrimText(t, retrimStep, storeAnchor)), demoReader(t, nil))
	if err != nil {
		t.Fatal(err)
	}
	var step sequencer.Step
	for _, d := range seq.Steps {
		if d.Kind == "retrim" {
			step = d.Step
			if d.Stage != sequencer.Adjustment {
				t.Errorf("stage %v, want adjustment", d.Stage)
			}
		}
	}
	tm, ok := step.(sequencer.Timed)
	if !ok {
		t.Fatal("retrim is not Timed")
	}
	// Hand-worked: one level, settle 50 ms + 4 readings × 1 PLC at 50 Hz = 130 ms;
	// 6 passes at most: 780 ms and 24 readings.
	if tm.Least() != 130*time.Millisecond {
		t.Errorf("least %s, want 130ms", tm.Least())
	}
	if d, n := tm.Budget(); d != 780*time.Millisecond || n != 24 {
		t.Errorf("budget %s, %d readings; want 780ms, 24", d, n)
	}
	st, _ := demoFiles(t, nil)
	pred := sequencer.PredictUncertainty(st, seq)
	if v, ok := pred["offset_error_final"]; !ok || !(v.U > 0) {
		t.Errorf("predicted offset_error_final: %+v (present %v), want U > 0", v, ok)
	}
	// A level beyond the station's cap is refused, naming the step.
	hot, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(retrimText(t, strings.Replace(retrimStep, "[0 V]", "[0 V, 60 mV]", 1), storeAnchor)), demoReader(t, nil))
	if err != nil {
		t.Fatal(err)
	}
	if err := sequencer.CheckCaps(st, hot); !errors.Is(err, sequencer.ErrSafety) || !strings.Contains(err.Error(), `step "offset retrim"`) {
		t.Errorf("want the level refused naming the step, got %v", err)
	}
}

func TestRetrimLoadErrors(t *testing.T) {
	cases := []struct {
		name, old, new, anchor, mark, want string
		off                                int // from the mark to the value the error is at
	}{
		{"unknown dac", "dac: offset", "dac: ofset", storeAnchor, "ofset", `no trim DAC called "ofset"`, 0},
		{"no earlier trim", "", "", "  - kind: trim ", "dac: offset", `no earlier trim step writes DAC "offset"`, 5},
		{"bad within unit", "within: 0.5 LSB", "within: 3 ppm", storeAnchor, "3 ppm", "expected a bound in LSB", 0},
		{"within not positive", "within: 0.5 LSB", "within: 0 uV", storeAnchor, "0 uV", "expected a positive bound", 0},
		{"no within", "    within: 0.5 LSB\n", "", storeAnchor, "kind: retrim", `missing required key "within"`, 0},
		{"max_passes 0", "within: 0.5 LSB", "within: 0.5 LSB\n    max_passes: 0", storeAnchor, "max_passes: 0", "expected 1 to 20 passes, found 0", 12},
		{"max_passes 21", "within: 0.5 LSB", "within: 0.5 LSB\n    max_passes: 21", storeAnchor, "max_passes: 21", "expected 1 to 20 passes, found 21", 12},
		{"no levels", "levels: [0 V]", "levels: []", storeAnchor, "[]", "expected at least 1 level", 0},
		{"unknown result", "passes: offset_passes", "tries: offset_passes", storeAnchor, "tries", `unknown retrim result "tries"`, 0},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			text := retrimText(t, strings.Replace(retrimStep, c.old, c.new, 1), c.anchor)
			i := strings.Index(text, "kind: retrim")
			i += strings.Index(text[i:], c.mark) + c.off
			if c.mark == "kind: retrim" {
				i -= 2 // the step's own position is its "- "
			}
			line := strings.Count(text[:i], "\n") + 1
			col := i - strings.LastIndexByte(text[:i], '\n')
			if c.name == "no within" || c.name == "unknown result" {
				col = -1 // positioned at the step or the results' key: the line is enough
			}
			_, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(text), demoReader(t, nil))
			for _, e := range files.Errs(err) {
				pos := fmt.Sprintf("brx200-sequence.yaml:%d:", line)
				if col > 0 {
					pos = fmt.Sprintf("brx200-sequence.yaml:%d:%d: ", line, col)
				}
				if strings.HasPrefix(e.Error(), pos) && strings.Contains(e.Msg, c.want) {
					return
				}
			}
			t.Errorf("%v\nwant at line %d col %d: …%s…", err, line, col, c.want)
		})
	}
}

// On the simulator's population with uneven DAC steps (dnl 0.5 LSB σ per bit),
// every re-trim ends within its bound or leaves the best code it tried, the DAC
// holds the code the last pass names, and each record replays unchanged.
func TestRetrimOnSimulatedPopulation(t *testing.T) {
	st, err := sequencer.ParseStation("brx200-station.yaml", []byte(demoFile(t, "brx200-station.yaml")))
	if err != nil {
		t.Fatal(err)
	}
	for role, in := range st.Instruments {
		in.Settings = map[string]string{}
		if role == "dut" {
			in.Settings = map[string]string{"dnl": "0.5", "defect": "none"}
		}
		st.Instruments[role] = in
	}
	seq, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(retrimText(t, retrimStep, storeAnchor)), demoReader(t, nil))
	if err != nil {
		t.Fatal(err)
	}
	e := openEngine(t, st, seq)
	lsb := 12.2e-6
	for i := range 12 {
		rec := e.Run(context.Background(), fmt.Sprintf("BRX-%05d", 100+i))
		if rec.Verdict == sequencer.Fault || len(rec.Retrims) == 0 {
			t.Fatalf("%s: verdict %s, fault %q, %d passes", rec.Serial, rec.Verdict, rec.Fault, len(rec.Retrims))
		}
		last := rec.Retrims[len(rec.Retrims)-1]
		best := rec.Retrims[0]
		for _, p := range rec.Retrims {
			if math.Abs(p.Error) < math.Abs(best.Error) {
				best = p
			}
		}
		switch {
		case last.Within && (math.Abs(last.Error) > 0.5*lsb || last.Next != last.Code):
			t.Errorf("%s: last pass %+v within but not left there or not within 0.5 LSB", rec.Serial, last)
		case !last.Within && last.Next != best.Code:
			t.Errorf("%s: bound not met, left %d, best tried %d", rec.Serial, last.Next, best.Code)
		}
		if code := resultOf(t, rec, "offset_code_final").Value; int(code) != last.Next {
			t.Errorf("%s: final code %g, last pass leaves %d", rec.Serial, code, last.Next)
		}
		var codes []int
		for _, p := range rec.Retrims {
			codes = append(codes, p.Code)
		}
		t.Logf("%s: codes %v, left %d with %.3g V (within %v)", rec.Serial, codes, last.Next, best.Error, last.Within)
		if d := replayed(t, st, seq, rec); len(d) > 0 {
			t.Errorf("%s: replay differs: %s", rec.Serial, strings.Join(d, "; "))
		}
	}
}

// With a bound of 30 µV the open-loop code's 25.4 µV is within it: one pass, no
// write, the trim's code stands.
func TestRetrimWithinAtOnce(t *testing.T) {
	_, _, e := retrimBench(t, strings.Replace(retrimStep, "within: 0.5 LSB", "within: 30 uV", 1))
	rec := e.Run(context.Background(), "BRX-00014")
	if rec.Verdict != sequencer.Pass || len(rec.Retrims) != 1 {
		t.Fatalf("verdict %s, reasons %q, passes %+v", rec.Verdict, rec.Reasons, rec.Retrims)
	}
	if p := rec.Retrims[0]; p.Code != 1794 || p.Next != 1794 || !p.Within || p.Measured {
		t.Errorf("pass %+v, want 1794 within, left there, nominal", p)
	}
	unevenState.Lock()
	writes := fmt.Sprint(unevenState.writes)
	unevenState.Unlock()
	if writes != "[2048 1794]" {
		t.Errorf("offset writes %s, want the clear and the trim's only", writes)
	}
}
