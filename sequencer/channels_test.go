package sequencer_test

// A three-channel unit on a fake bench: a switch that records every Route and
// Release, a meter whose reading depends on the channel the switch routes, and a
// DUT port with one offset DAC per channel.

import (
	"context"
	"errors"
	"fmt"
	"math"
	"net/url"
	"slices"
	"strconv"
	"strings"
	"sync"
	"testing"

	"trimline/instruments"
	"trimline/instruments/files"
	"trimline/limits"
	"trimline/sequencer"
)

// triBench is the fake bench's state; one test at a time uses it.
type triBench struct {
	mu       sync.Mutex
	routed   string   // "" = released
	routes   []string // every Route, in order
	releases int
	level    float64
	on       bool
	codes    map[string]int
	commands []string
	reads    int
	failRead int // the Nth meter read fails (1-based); 0 = never
	// cancel is called at the cancelRead-th meter read (1-based; 0 = never).
	cancelRead int
	cancel     func()
}

var tri = &triBench{}

// Each channel's transfer: y = 10·(1 + gainErr)·x + offset + code·10 µV.
var triOffset = map[string]float64{"1": 1e-3, "2": -2e-3, "3": 3e-3}
var triGainErr = map[string]float64{"1": 0, "2": 1e-3, "3": -2e-3}

func (b *triBench) reset() {
	b.mu.Lock()
	defer b.mu.Unlock()
	b.routed, b.routes, b.releases, b.level, b.on = "", nil, 0, 0, false
	b.codes, b.commands, b.reads, b.failRead = map[string]int{"1": 0, "2": 0, "3": 0}, nil, 0, 0
	b.cancelRead, b.cancel = 0, nil
}

type triDriver struct{}

func (triDriver) Open(ctx context.Context, u *url.URL, s instruments.Spec) (instruments.Instrument, error) {
	switch u.Host {
	case "source":
		return triSource{}, nil
	case "meter":
		return triMeter{}, nil
	case "dut":
		return triPort{}, nil
	case "mux":
		return triSwitch{}, nil
	}
	return nil, fmt.Errorf("trifake: no instrument %q", u.Host)
}

func init() { instruments.Register("trifake", triDriver{}) }

type triSource struct{}

func (triSource) Close() error { return nil }
func (triSource) SetLevel(ctx context.Context, v float64) error {
	tri.mu.Lock()
	defer tri.mu.Unlock()
	tri.level = v
	return nil
}
func (triSource) SetOutput(ctx context.Context, on bool) error {
	tri.mu.Lock()
	defer tri.mu.Unlock()
	tri.on = on
	return nil
}
func (triSource) SetCompliance(ctx context.Context, a float64) error { return nil }

type triMeter struct{}

func (triMeter) Close() error { return nil }

// Read reads the routed channel's output, the readings alternating ±1 µV about
// it; with no channel routed the input is open and the meter overloads.
func (triMeter) Read(ctx context.Context, n int) ([]instruments.Reading, error) {
	tri.mu.Lock()
	defer tri.mu.Unlock()
	tri.reads++
	if tri.reads == tri.failRead {
		return nil, errors.New("injected: meter stopped answering")
	}
	if tri.reads == tri.cancelRead {
		tri.cancel()
		return nil, ctx.Err()
	}
	out := make([]instruments.Reading, n)
	ch := tri.routed
	if ch == "" {
		for i := range out {
			out[i].Flag = instruments.FlagOverload
		}
		return out, nil
	}
	x := 0.0
	if tri.on {
		x = tri.level
	}
	y := 10*(1+triGainErr[ch])*x + triOffset[ch] + float64(tri.codes[ch])*10e-6
	for i := range out {
		out[i].Value = y + float64(1-2*(i%2))*1e-6
	}
	return out, nil
}

type triPort struct{}

func (triPort) Close() error { return nil }
func (triPort) Command(ctx context.Context, line string) error {
	tri.mu.Lock()
	defer tri.mu.Unlock()
	tri.commands = append(tri.commands, line)
	f := strings.Fields(line)
	switch {
	case len(f) == 3 && f[0] == "TRIM":
		c, err := strconv.Atoi(f[2])
		if _, ok := tri.codes[f[1]]; !ok || err != nil {
			return fmt.Errorf("bad trim command %q", line)
		}
		tri.codes[f[1]] = c
	case line == "NV STORE":
	default:
		return fmt.Errorf("unknown command %q", line)
	}
	return nil
}
func (triPort) Query(ctx context.Context, line string) (string, error) {
	tri.mu.Lock()
	defer tri.mu.Unlock()
	f := strings.Fields(line)
	switch {
	case line == "SN?":
		return "TRI-00001", nil
	case line == "TEMP?": // the unit's own sensor (soak_test.go)
		return " 84.93\r\n", nil
	case len(f) == 2 && f[0] == "TRIM?":
		if c, ok := tri.codes[f[1]]; ok {
			return strconv.Itoa(c), nil
		}
	}
	return "", fmt.Errorf("unknown query %q", line)
}

type triSwitch struct{}

func (triSwitch) Close() error { return nil }
func (triSwitch) Route(ctx context.Context, ch string) error {
	tri.mu.Lock()
	defer tri.mu.Unlock()
	tri.routed = ch
	tri.routes = append(tri.routes, ch)
	return nil
}
func (triSwitch) Release(ctx context.Context) error {
	if err := ctx.Err(); err != nil {
		return err // a real driver refuses to write on an expired context
	}
	tri.mu.Lock()
	defer tri.mu.Unlock()
	tri.routed = ""
	tri.releases++
	return nil
}

const triStation = `station: {id: TC1, name: three-channel test}
instruments:
  source: {address: "trifake://source", asset: S1, cal_due: 2099-12-31, accuracy: {of_reading: 20 ppm, of_range: 5 ppm, range: 100 mV}}
  meter: {address: "trifake://meter", asset: M1, cal_due: 2099-12-31, accuracy: {of_reading: 30 ppm, of_range: 4 ppm, range: 10 V, resolution: 1 uV}}
  dut: {address: "trifake://dut", asset: F1}
  mux: {kind: switch, address: "trifake://mux", asset: X1}
safety:
  source_rating: {voltage: 1 V, current: 20 mA}
  max_source_voltage: 200 mV
  max_source_current: 10 mA
`

const triSequence = `sequence: {product: TRI-3, revision: A, maker: Fenwright Labs}
limits: tri3-limits.yaml
ideal: {gain: 10, offset: 0 V, full_scale: 2 V}
meter: {range: 10 V, nplc: 1}
channels:
  count: 3
  switch: mux
dacs:
  - name: offset
    adjusts: offset
    bits: 12
    lsb: 10 uV
    coding: twos_complement
    write: "TRIM {channel} {code}"
    read: "TRIM? {channel}"
steps:
  - kind: identify
    serial_query: "SN?"
  - kind: clear_trim
  - kind: sweep
    name: pre
    from: -100 mV
    to: 100 mV
    points: 5
    settle: 0 ms
    readings: 2
  - kind: fit
    name: pre fit
    sweep: pre
    results: {offset: pre_offset, gain_error: pre_gain_error}
  - kind: trim
    fit: pre fit
    results: {offset: offset_code}
  - kind: store
    command: "NV STORE"
  - kind: sweep
    name: verify
    from: -100 mV
    to: 100 mV
    points: 5
    settle: 0 ms
    readings: 2
  - kind: fit
    name: verify fit
    sweep: verify
    results: {offset: post_offset, noise: post_noise}
  - kind: measure
    name: zero 2
    channels: ["2"]
    settle: 0 ms
    readings: 4
    results: {error: zero_error}
`

const triLimits = `limit_set: {name: TRI-3 limits, revision: "1", product: TRI-3}
limits:
  - name: untrimmed offset
    description: every channel before trim
    unit: mV
    uses: [pre_offset]
    tolerance: {lower: -5, upper: 5}
  - name: offset after trim
    description: every channel after trim
    unit: uV
    uses: [post_offset]
    tolerance: {lower: -50, upper: 50}
  - name: channel 2 untrimmed
    description: channel 2 feeds the reference and must come close
    unit: mV
    uses: [pre_offset]
    channel: "2"
    expr: abs(pre_offset) <= 1.5
  - name: zero on channel 2
    description: output with the input not driven
    unit: uV
    uses: [zero_error]
    expr: abs(zero_error) <= 20
`

func triFiles(seq, lim string) func(string) ([]byte, error) {
	return func(p string) ([]byte, error) {
		if strings.HasSuffix(p, "tri3-limits.yaml") {
			return []byte(lim), nil
		}
		return nil, fmt.Errorf("no file %s", p)
	}
}

func triConfig(t *testing.T) sequencer.Config {
	t.Helper()
	st, err := sequencer.ParseStation("tri3-station.yaml", []byte(triStation))
	if err != nil {
		t.Fatal(allErrs(err))
	}
	seq, err := sequencer.ParseSequence("tri3-sequence.yaml", []byte(triSequence), triFiles(triSequence, triLimits))
	if err != nil {
		t.Fatal(allErrs(err))
	}
	return sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test"}
}

func allErrs(err error) string {
	var b strings.Builder
	for _, e := range files.Errs(err) {
		b.WriteString("\n" + e.Error())
	}
	if b.Len() == 0 {
		return err.Error()
	}
	return b.String()
}

func resultOn(rec *sequencer.Record, name, ch string) (sequencer.Result, bool) {
	for _, r := range rec.Results {
		if r.Name == name && r.Channel == ch {
			return r, true
		}
	}
	return sequencer.Result{}, false
}

// TestThreeChannels runs sweep, fit, trim and verify on each of three channels.
// Hand-worked from the fake's transfer y = 10·(1 + e)·x + offset + code·10 µV
// (readings alternate ±1 µV, so the means are exact):
//
//	channel  offset  e       trim code = −offset/10 µV  post offset
//	1        1 mV    0       −100                        0
//	2        −2 mV   1e-3    200                         0
//	3        3 mV    −2e-3   −300                        0
//
// Limits: ±5 mV before trim and ±50 µV after pass on every channel; channel 2's
// own |pre_offset| ≤ 1.5 mV fails (2 mV); channel 2's zero error is 0 and passes.
func TestThreeChannels(t *testing.T) {
	tri.reset()
	cfg := triConfig(t)
	if got := cfg.Sequence.Channels; !slices.Equal(got, []string{"1", "2", "3"}) {
		t.Fatalf("Channels = %v", got)
	}
	e, err := sequencer.Open(context.Background(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	defer e.Close()
	rec := e.Run(context.Background(), "TRI-00001")
	if rec.Verdict != sequencer.Fail {
		t.Fatalf("verdict %s (fault %q, reasons %q), want FAIL on the channel-2 limit", rec.Verdict, rec.Fault, rec.Reasons)
	}
	if len(rec.Reasons) != 1 || !strings.HasPrefix(rec.Reasons[0], `limit "channel 2 untrimmed", channel 2: `) {
		t.Errorf("reasons %q", rec.Reasons)
	}
	tri.mu.Lock()
	routes, releases, routed, on, cmds := tri.routes, tri.releases, tri.routed, tri.on, tri.commands
	tri.mu.Unlock()
	// Routed before each channel of each step that drives or reads (the two
	// sweeps and the channel-2 measure), never for a fit or a trim.
	if want := []string{"1", "2", "3", "1", "2", "3", "2"}; !slices.Equal(routes, want) {
		t.Errorf("routes %v, want %v", routes, want)
	}
	if releases != 2 || routed != "" || on {
		t.Errorf("after the run: %d releases (want 2: at open and at the end), routed %q, output on %v", releases, routed, on)
	}
	for _, c := range []string{"TRIM 1 -100", "TRIM 2 200", "TRIM 3 -300"} {
		if !slices.Contains(cmds, c) {
			t.Errorf("no %q among the DUT commands %q", c, cmds)
		}
	}

	for _, w := range []struct {
		name, ch string
		v, tol   float64
	}{
		{"pre_offset", "1", 1e-3, 1e-12}, {"pre_offset", "2", -2e-3, 1e-12}, {"pre_offset", "3", 3e-3, 1e-12},
		{"pre_gain_error", "1", 0, 1e-12}, {"pre_gain_error", "2", 1e-3, 1e-12}, {"pre_gain_error", "3", -2e-3, 1e-12},
		{"offset_code", "1", -100, 0}, {"offset_code", "2", 200, 0}, {"offset_code", "3", -300, 0},
		{"post_offset", "1", 0, 1e-12}, {"post_offset", "2", 0, 1e-12}, {"post_offset", "3", 0, 1e-12},
		{"zero_error", "2", 0, 1e-12},
	} {
		r, ok := resultOn(rec, w.name, w.ch)
		if !ok || !r.Valid || math.Abs(r.Value-w.v) > w.tol {
			t.Errorf("%s on channel %s = %+v (found %v), want %g", w.name, w.ch, r, ok, w.v)
		}
	}
	for _, ch := range []string{"", "1", "3"} {
		if _, ok := resultOn(rec, "zero_error", ch); ok {
			t.Errorf("zero_error recorded on channel %q: the step runs on channel 2 only", ch)
		}
	}
	if n := len(rec.Results); n != 3*5+1 {
		t.Errorf("%d results, want 16 (5 per channel and zero_error)", n)
	}
	for i, ch := range []string{"1", "2", "3"} {
		if tc := rec.Trims[i]; tc.Channel != ch || !tc.Written || !tc.Stored {
			t.Errorf("trim %d = %+v, want channel %s written and stored", i, tc, ch)
		}
	}
	var sweeps []string
	for _, s := range rec.Sweeps {
		sweeps = append(sweeps, s.Name+"@"+s.Channel)
	}
	if want := "pre@1 pre@2 pre@3 verify@1 verify@2 verify@3 zero 2@2"; strings.Join(sweeps, " ") != want {
		t.Errorf("sweeps %q, want %q", strings.Join(sweeps, " "), want)
	}
	var fits []string
	for _, f := range rec.Fits {
		fits = append(fits, f.Step+"@"+f.Channel)
	}
	if want := "pre fit@1 pre fit@2 pre fit@3 verify fit@1 verify fit@2 verify fit@3"; strings.Join(fits, " ") != want {
		t.Errorf("fits %q", strings.Join(fits, " "))
	}
	if n := len(rec.Steps); n != 21 || rec.Steps[0].Channel != "" || rec.Steps[1].Channel != "1" || rec.Steps[20].Channel != "2" {
		t.Errorf("%d step runs (want 21: identify, store and zero 2 once, six steps three times): %+v", n, rec.Steps)
	}

	var outs []string
	for _, o := range rec.Outcomes {
		outs = append(outs, fmt.Sprintf("%s/%s/%v", o.Name, o.Channel, o.Pass))
	}
	want := []string{"untrimmed offset/1/true", "untrimmed offset/2/true", "untrimmed offset/3/true",
		"offset after trim/1/true", "offset after trim/2/true", "offset after trim/3/true",
		"channel 2 untrimmed/2/false", "zero on channel 2/2/true"}
	if !slices.Equal(outs, want) {
		t.Errorf("outcomes\n %q\nwant\n %q", outs, want)
	}
	if o := rec.Outcomes[6]; math.Abs(o.Values["pre_offset"]+2) > 1e-9 {
		t.Errorf("channel 2 limit saw pre_offset = %v mV, want -2", o.Values)
	}

	// Replay recomputes every channel from the stored readings.
	again, err := sequencer.Replay(cfg, rec)
	if err != nil {
		t.Fatal(err)
	}
	if d := sequencer.Differences(rec, again); len(d) > 0 {
		t.Errorf("replay disagrees:\n  %s", strings.Join(d, "\n  "))
	}
	if len(again.Results) != len(rec.Results) || len(again.Outcomes) != len(rec.Outcomes) || len(again.Sweeps) != len(rec.Sweeps) {
		t.Errorf("replay: %d results, %d outcomes, %d sweeps; run %d, %d, %d", len(again.Results), len(again.Outcomes), len(again.Sweeps),
			len(rec.Results), len(rec.Outcomes), len(rec.Sweeps))
	}
	// A replay that lost a channel's sweep says so: the channel matters.
	broken := *rec
	broken.Sweeps = slices.DeleteFunc(slices.Clone(rec.Sweeps), func(s sequencer.Sweep) bool { return s.Name == "verify" && s.Channel == "3" })
	again, err = sequencer.Replay(cfg, &broken)
	if err != nil {
		t.Fatal(err)
	}
	if d := strings.Join(sequencer.Differences(rec, again), "\n"); !strings.Contains(d, "post_offset@3") {
		t.Errorf("replay without channel 3's verify sweep: differences %q, want post_offset@3 named", d)
	}
}

// TestThreeChannelsFault: a meter that stops answering on channel 3 of the
// verify sweep faults the run; the switch is released and the output is off.
// Reads: the pre-trim sweep takes 5 points × 3 channels = 15, verify channels 1
// and 2 take 10 more, so the 27th read is channel 3's second point.
func TestThreeChannelsFault(t *testing.T) {
	tri.reset()
	tri.failRead = 27
	cfg := triConfig(t)
	e, err := sequencer.Open(context.Background(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	defer e.Close()
	rec := e.Run(context.Background(), "TRI-00001")
	if rec.Verdict != sequencer.Fault || !strings.Contains(rec.Fault, "injected") {
		t.Fatalf("verdict %s, fault %q", rec.Verdict, rec.Fault)
	}
	tri.mu.Lock()
	defer tri.mu.Unlock()
	if tri.routed != "" || tri.releases != 2 || tri.on {
		t.Errorf("after the fault: routed %q, %d releases (want 2), output on %v", tri.routed, tri.releases, tri.on)
	}
	if last := tri.routes[len(tri.routes)-1]; last != "3" {
		t.Errorf("last route %q, want 3", last)
	}
}

// TestThreeChannelsAbort: an operator's stop on channel 2 of the pre-trim sweep
// (read 8: channel 1 takes reads 1–5) aborts the run, and the switch is released
// with a context of its own after the run's was cancelled.
func TestThreeChannelsAbort(t *testing.T) {
	tri.reset()
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	tri.cancelRead, tri.cancel = 8, cancel
	cfg := triConfig(t)
	e, err := sequencer.Open(context.Background(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	defer e.Close()
	rec := e.Run(ctx, "TRI-00001")
	if rec.Verdict != sequencer.Aborted {
		t.Fatalf("verdict %s, fault %q", rec.Verdict, rec.Fault)
	}
	tri.mu.Lock()
	defer tri.mu.Unlock()
	if tri.routed != "" || tri.releases != 2 || tri.on || !slices.Equal(tri.routes, []string{"1", "2"}) {
		t.Errorf("after the abort: routed %q, %d releases (want 2), output on %v, routes %v", tri.routed, tri.releases, tri.on, tri.routes)
	}
}

// TestThreeChannelsPrediction: on paper every channel is the ideal unit, and a
// per-channel result's uncertainty is found by its plain name.
func TestThreeChannelsPrediction(t *testing.T) {
	cfg := triConfig(t)
	p := sequencer.PredictUncertainty(cfg.Station, cfg.Sequence)
	for _, n := range []string{"pre_offset", "post_offset", "zero_error"} {
		if v, ok := p[n]; !ok || !(v.U > 0) {
			t.Errorf("predicted %s = %+v (found %v), want an uncertainty", n, v, ok)
		}
	}
	checks, err := sequencer.CheckTUR(cfg.Station, cfg.Sequence)
	if err != nil || len(checks) != 2 || checks[0].Result != "pre_offset" || !(checks[0].TUR > 0) {
		t.Errorf("CheckTUR = %+v, %v", checks, err)
	}
}

// TestChannelLoadErrors: each mistake is reported at the key that makes it.
func TestChannelLoadErrors(t *testing.T) {
	for _, tc := range []struct {
		name        string
		seq, lim    [2]string // old, new
		where, want string
	}{
		{"duplicate channel", [2]string{"  count: 3\n", "  names: [\"1\", \"2\", \"1\"]\n"}, [2]string{}, "tri3-sequence.yaml:6:21", `channel "1" is already named (item 1)`},
		{"bad channel name", [2]string{"  count: 3\n", "  names: [\"1\", \"2\", \"a-b\"]\n"}, [2]string{}, "tri3-sequence.yaml:6:21", `channel name "a-b": expected 1 to 8 letters and digits`},
		{"too many", [2]string{"  count: 3\n", "  count: 17\n"}, [2]string{}, "tri3-sequence.yaml:6:10", "expected 1 to 16 channels, found 17"},
		{"step channel", [2]string{`channels: ["2"]`, `channels: ["2", "4"]`}, [2]string{}, "tri3-sequence.yaml:49:21", `no channel "4": the sequence's channels are "1", "2", "3"`},
		{"step word", [2]string{`channels: ["2"]`, `channels: some`}, [2]string{}, "tri3-sequence.yaml:49:15", "expected all, none or a list of channel names"},
		{"fit on a channel its sweep skips", [2]string{"    name: pre\n", "    name: pre\n    channels: [\"1\", \"2\"]\n"}, [2]string{}, "tri3-sequence.yaml:30:12",
			`this step runs on channel "3", where step "pre" does not run (it runs on 1, 2)`},
		{"unit-wide trim of a per-channel fit", [2]string{"    fit: pre fit\n", "    fit: pre fit\n    channels: none\n"}, [2]string{}, "tri3-sequence.yaml:32:10",
			`step "pre fit" runs per channel (1, 2, 3), but this step runs once for the whole unit`},
		{"switch used as a meter", [2]string{"switch: mux", "switch: meter"}, [2]string{}, "tri3-sequence.yaml:7:11", `role "meter" routes the channels, but step "pre"`},
		{"limit channel", [2]string{}, [2]string{`channel: "2"`, `channel: "5"`}, "tri3-limits.yaml:17:14", `no channel "5": the sequence's channels are "1", "2", "3"`},
		{"limit channel the result lacks", [2]string{}, [2]string{"uses: [zero_error]\n    expr", "uses: [zero_error]\n    channel: \"1\"\n    expr"}, "tri3-limits.yaml:23:14", `result "zero_error" is measured on channels "2" only`},
	} {
		t.Run(tc.name, func(t *testing.T) {
			seq, lim := triSequence, triLimits
			if tc.seq[0] != "" {
				seq = strings.Replace(seq, tc.seq[0], tc.seq[1], 1)
			}
			if tc.lim[0] != "" {
				lim = strings.Replace(lim, tc.lim[0], tc.lim[1], 1)
			}
			_, err := sequencer.ParseSequence("tri3-sequence.yaml", []byte(seq), triFiles(seq, lim))
			es := files.Errs(err)
			if len(es) != 1 || !strings.HasPrefix(es[0].Error(), tc.where+": ") || !strings.Contains(es[0].Msg, tc.want) {
				t.Fatalf("got %s\nwant one error at %s containing %q", allErrs(err), tc.where, tc.want)
			}
		})
	}
	// A step's channels key in a sequence without channels.
	seq := strings.Replace(triSequence, "channels:\n  count: 3\n  switch: mux\n", "", 1)
	seq = strings.ReplaceAll(seq, "{channel} ", "")
	seq = strings.ReplaceAll(seq, " {channel}", "")
	lim := strings.Replace(triLimits, "    channel: \"2\"\n", "", 1)
	_, err := sequencer.ParseSequence("tri3-sequence.yaml", []byte(seq), triFiles(seq, lim))
	if es := files.Errs(err); len(es) != 1 || !strings.Contains(es[0].Msg, "the sequence declares no channels") {
		t.Errorf("channels key without channels: %s", allErrs(err))
	}
}

// TestSwitchBoundAsMeter: the station must bind the switch role as a switch; the
// refusal points at the sequence's channels.switch.
func TestSwitchBoundAsMeter(t *testing.T) {
	cfg := triConfig(t)
	st, err := sequencer.ParseStation("tri3-station.yaml", []byte(strings.Replace(triStation,
		`mux: {kind: switch, address: "trifake://mux", asset: X1}`,
		`mux: {kind: meter, address: "trifake://mux", asset: X1, cal_due: 2099-12-31, accuracy: {of_reading: 30 ppm, of_range: 4 ppm, range: 10 V}}`, 1)))
	if err != nil {
		t.Fatal(allErrs(err))
	}
	err = sequencer.CheckCaps(st, cfg.Sequence)
	if !errors.Is(err, sequencer.ErrUnboundRole) || !strings.Contains(err.Error(), `tri3-sequence.yaml:7:11: channels.switch names the "mux" role`) {
		t.Fatalf("CheckCaps = %v", err)
	}
	cfg.Station = st
	if _, err := sequencer.Open(context.Background(), cfg); err == nil {
		t.Fatal("Open with the switch bound as a meter succeeded")
	}
}

// TestReadmeChannelExamples: README's Channels section's limit example (a block
// marked "yaml limits") loads against the demo sequence with the section's
// channels, and its channel-B limit judges channel B only.
func TestReadmeChannelExamples(t *testing.T) {
	var chans, lims string
	for _, b := range fencedBlocks(t, "README.md", "## Writing a sequence", "yaml") {
		if strings.Contains(b.text, "\nchannels:\n") {
			chans = b.text
		}
	}
	for _, b := range fencedBlocks(t, "README.md", "## Writing a sequence", "yaml limits") {
		lims = b.text
	}
	if chans == "" || lims == "" {
		t.Fatal("README's Channels section has no channels: example or no limits example")
	}
	demo := withTopKey(demoFile(t, "brx200-sequence.yaml"), "requires", chans)
	seq, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(demo), demoReader(t, nil))
	if err != nil {
		t.Fatal(allErrs(err))
	}
	if !slices.Equal(seq.Channels, []string{"A", "B", "C", "D"}) || seq.Switch != "mux" {
		t.Fatalf("channels %v, switch %q", seq.Channels, seq.Switch)
	}
	set, err := limits.Load("limits.yaml", []byte("limit_set: {name: x, revision: \"1\", product: BRX-200}\n"+lims), seq.Catalog())
	if err != nil {
		t.Fatal(allErrs(err))
	}
	v := func(x float64) limits.Value { return limits.Value{V: x, Valid: true} }
	// 300 µV on every channel: inside ±800 µV, outside channel B's ±200 µV.
	res := map[string]limits.Value{}
	for _, ch := range seq.Channels {
		res[limits.ChannelKey("post_offset", ch)] = v(300e-6)
	}
	var got []string
	for _, o := range set.Judge(res) {
		got = append(got, fmt.Sprintf("%s/%s/%v", o.Name, o.Channel, o.Pass))
	}
	want := []string{"offset after trim/A/true", "offset after trim/B/true", "offset after trim/C/true", "offset after trim/D/true",
		"reference channel offset/B/false"}
	if !slices.Equal(got, want) {
		t.Errorf("outcomes %q, want %q", got, want)
	}
}
