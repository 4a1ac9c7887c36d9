package sequencer_test

// End-to-end checks of the step kinds on the simulated bench: every feature of a
// kind runs a unit through sequencer.Open and Run, and every measured record
// replays to the same numbers (sequencer.Replay, sequencer.Differences).

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"strings"
	"testing"

	"trimline/limits"
	"trimline/sequencer"
)

// kindsBench is a bench for one case: a sequence (and optionally a limit file) as
// text, and the simulated instruments' settings laid over the demo station's.
type kindsBench struct {
	seq string
	lim string // "" = the demo's limit file
	set map[string]map[string]string
}

// open loads the files and opens an engine on a fresh simulated bench.
func (b kindsBench) open(t *testing.T) (*sequencer.Engine, sequencer.Config) {
	t.Helper()
	cfg := b.config(t)
	e, err := sequencer.Open(context.Background(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { e.Close() })
	return e, cfg
}

func (b kindsBench) config(t *testing.T) sequencer.Config {
	t.Helper()
	st, err := sequencer.ParseStation("brx200-station.yaml", []byte(demoFile(t, "brx200-station.yaml")))
	if err != nil {
		t.Fatal(err)
	}
	for role, in := range st.Instruments {
		s := map[string]string{}
		for k, v := range in.Settings {
			s[k] = v
		}
		for k, v := range b.set[role] {
			s[k] = v
		}
		in.Settings = s
		st.Instruments[role] = in
	}
	over := map[string]string{}
	if b.lim != "" {
		over["brx200-limits.yaml"] = b.lim
	}
	seq, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(b.seq), demoReader(t, over))
	if err != nil {
		t.Fatal(err)
	}
	return sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test"}
}

// runReplayed runs serial and, when the record holds a measurement, replays it and
// requires the replay to agree with it in every computed quantity.
func runReplayed(t *testing.T, e *sequencer.Engine, cfg sequencer.Config, serial string) *sequencer.Record {
	t.Helper()
	rec := e.Run(context.Background(), serial)
	if rec.Verdict == sequencer.Fault || rec.Verdict == sequencer.Aborted {
		return rec
	}
	again, err := sequencer.Replay(cfg, rec) // also a run judged before any sweep: its steps say why it ended
	if err != nil {
		t.Fatalf("%s: replay: %v", serial, err)
	}
	if d := sequencer.Differences(rec, again); len(d) > 0 {
		t.Errorf("%s: replay disagrees with the run:\n  %s", serial, strings.Join(d, "\n  "))
	}
	if len(again.Steps) != len(rec.Steps) {
		t.Errorf("%s: replay ran %d steps, the run %d", serial, len(again.Steps), len(rec.Steps))
	}
	for i := range min(len(again.Steps), len(rec.Steps)) {
		if a, b := rec.Steps[i], again.Steps[i]; a.Status != b.Status {
			t.Errorf("%s: step %q: run %s, replay %s", serial, a.Name, a.Status, b.Status)
		}
	}
	return rec
}

func stepStatus(t *testing.T, rec *sequencer.Record, name string) sequencer.StepRun {
	t.Helper()
	for _, s := range rec.Steps {
		if s.Name == name {
			return s
		}
	}
	t.Fatalf("no step %q in the record (steps %+v)", name, rec.Steps)
	return sequencer.StepRun{}
}

func trimOf(t *testing.T, rec *sequencer.Record, dac string) sequencer.TrimCode {
	t.Helper()
	for _, tc := range rec.Trims {
		if tc.DAC == dac {
			return tc
		}
	}
	t.Fatalf("no %s trim in the record", dac)
	return sequencer.TrimCode{}
}

// withLimits is the demo limit file with its limits: list replaced.
func withLimits(t *testing.T, list string) string {
	t.Helper()
	demo := demoFile(t, "brx200-limits.yaml")
	i := strings.Index(demo, "\nlimits:\n")
	if i < 0 {
		t.Fatal("demo limit file has no limits: section")
	}
	return demo[:i] + "\nlimits:\n" + list
}

// replaceAll applies old/new pairs to s, each of which must occur.
func replaceAll(t *testing.T, s string, pairs ...string) string {
	t.Helper()
	for i := 0; i < len(pairs); i += 2 {
		if !strings.Contains(s, pairs[i]) {
			t.Fatalf("%q not in the text", pairs[i])
		}
		s = strings.ReplaceAll(s, pairs[i], pairs[i+1])
	}
	return s
}

// offsetOnlySeq is a card with one 10-bit two's-complement offset DAC written in
// hex, locked until it hears an unlock command.
func offsetOnlySeq(unlock bool) string {
	s := `sequence:
  product: BRX-200
  revision: C
  maker: Fenwright Labs
requires: [source, meter, dut]
limits: brx200-limits.yaml
serial_pattern: "BRX-[0-9]{5}"
ideal: {gain: 200, offset: 2.5 V, full_scale: 4 V}
meter: {range: 10 V, nplc: 1}
dacs:
  - name: offset
    adjusts: offset
    bits: 10
    lsb: 30 uV
    coding: twos_complement
    format: hex
    write: "TRIM OFS {code}"
    read: "TRIM OFS?"
steps:
  - kind: identify
    serial_query: "SN?"
`
	if unlock {
		s += `  - kind: command
    name: unlock
    send:
      - command: "UNLOCK 5A17"
`
	}
	return s + `  - kind: clear_trim
  - kind: sweep
    name: pre-trim
    from: -10 mV
    to: 10 mV
    points: 11
    settle: 20 ms
    readings: 8
  - kind: fit
    name: pre-trim fit
    sweep: pre-trim
    results: {offset: pre_offset}
  - kind: trim
    fit: pre-trim fit
    dacs: [offset]
    results: {offset: offset_code}
  - kind: store
    command: "NV STORE"
  - kind: sweep
    name: verify
    from: -10 mV
    to: 10 mV
    points: 11
    settle: 20 ms
    readings: 8
  - kind: fit
    name: verify fit
    sweep: verify
    results: {offset: post_offset, noise: post_noise}
`
}

const offsetOnlyLimits = `  - name: untrimmed offset in range
    description: Output error at zero input before trim.
    unit: mV
    uses: [pre_offset]
    tolerance: {lower: -15, upper: 15}
  - name: offset after trim
    description: Output error at zero input after trim.
    unit: uV
    uses: [post_offset]
    tolerance: {lower: -800, upper: 800}
  - name: offset code in range
    description: The signed code keeps a dozen codes of headroom.
    unit: code
    uses: [offset_code]
    expr: within(offset_code, -500, 499)
`

var offsetOnlyCard = map[string]string{"trim": "offset", "offset_bits": "10", "offset_coding": "twos_complement",
	"code_format": "hex", "offset_lsb": "30 uV", "cmd_unlock": "UNLOCK 5A17", "defect_rate": "0"}

func merged(a, b map[string]string) map[string]string {
	out := map[string]string{}
	for k, v := range a {
		out[k] = v
	}
	for k, v := range b {
		out[k] = v
	}
	return out
}

// 1. An offset-only card: one signed 10-bit offset DAC in hex behind a lock.
func TestOffsetOnlyCard(t *testing.T) {
	lim := withLimits(t, offsetOnlyLimits)
	t.Run("population", func(t *testing.T) {
		e, cfg := kindsBench{seq: offsetOnlySeq(true), lim: lim, set: map[string]map[string]string{"dut": offsetOnlyCard}}.open(t)
		signs := map[bool]int{}
		for i := range 8 {
			rec := runReplayed(t, e, cfg, fmt.Sprintf("BRX-%05d", 100+i))
			if rec.Verdict != sequencer.Pass {
				t.Fatalf("%s: verdict %s: %v %s", rec.Serial, rec.Verdict, rec.Reasons, rec.Fault)
			}
			if len(rec.Trims) != 1 {
				t.Fatalf("%s: trims %+v, want the offset DAC only", rec.Serial, rec.Trims)
			}
			tc := rec.Trims[0]
			if tc.DAC != "offset" || tc.Before != 0 || !tc.Written || !tc.Stored || tc.Readback != tc.Code || tc.Code < -512 || tc.Code > 511 {
				t.Errorf("%s: trim %+v", rec.Serial, tc)
			}
			if r := resultOf(t, rec, "offset_code"); !r.Valid || r.Value != float64(tc.Code) {
				t.Errorf("%s: offset_code %+v, code %d", rec.Serial, r, tc.Code)
			}
			// No gain DAC: ComputeTrim on the pre-trim fit alone must give the code.
			d, _ := cfg.Sequence.DAC("offset")
			f := rec.Fits[0]
			sol, err := sequencer.ComputeTrim(sequencer.TrimPlan{DACs: []sequencer.DAC{d}, Pivot: 2.5}, f.Slope, f.Intercept, []int{0}, 200, 2.5)
			if err != nil || sol.Codes[0].Code != tc.Code {
				t.Errorf("%s: ComputeTrim from the pre-trim fit gives %+v (%v), record %d", rec.Serial, sol.Codes, err, tc.Code)
			}
			signs[tc.Code < 0]++
		}
		if signs[true] == 0 || signs[false] == 0 {
			t.Errorf("codes of one sign only (%v): the population does not exercise signed codes", signs)
		}
	})
	t.Run("hand-worked unit", func(t *testing.T) {
		// Hand-worked: 3.1 mV of offset at the output, no noise or instrument error;
		// 30 µV per code, no gain DAC, so ideal = −3.1 mV / 30 µV = −103.33 and the
		// code is −103 (the 10-bit pattern 0x399); as left the output keeps
		// 3.1 mV − 103·30 µV = +10 µV.
		e, cfg := kindsBench{seq: offsetOnlySeq(true), lim: lim,
			set: ideal(merged(offsetOnlyCard, map[string]string{"offset": "3.1 mV"}))}.open(t)
		rec := runReplayed(t, e, cfg, "BRX-00042")
		if rec.Verdict != sequencer.Pass {
			t.Fatalf("verdict %s: %v %s", rec.Verdict, rec.Reasons, rec.Fault)
		}
		tc := trimOf(t, rec, "offset")
		near(t, "ideal code", tc.Ideal, -103.333, 0.05)
		if tc.Code != -103 || tc.Readback != -103 {
			t.Errorf("code %d read back %d, want -103", tc.Code, tc.Readback)
		}
		d, _ := cfg.Sequence.DAC("offset")
		if w := d.Word(tc.Code); w != "399" {
			t.Errorf("code -103 written as %q, want 399", w)
		}
		near(t, "pre offset", resultOf(t, rec, "pre_offset").Value, 3.1e-3, 2e-6)
		near(t, "post offset", resultOf(t, rec, "post_offset").Value, 10e-6, 2e-6)
	})
	t.Run("no unlock", func(t *testing.T) {
		e, _ := kindsBench{seq: offsetOnlySeq(false), lim: lim, set: map[string]map[string]string{"dut": offsetOnlyCard}}.open(t)
		rec := e.Run(context.Background(), "BRX-00100")
		if rec.Verdict != sequencer.Fault && rec.Verdict != sequencer.Fail {
			t.Fatalf("a locked card ran to %s", rec.Verdict)
		}
		msg := rec.Fault + strings.Join(rec.Reasons, "; ")
		t.Logf("%s: %s", rec.Verdict, msg)
		if !strings.Contains(msg, "locked") || !strings.Contains(msg, "offset") {
			t.Errorf("message does not say the card is locked: %q", msg)
		}
	})
}

// 2. An offset DAC before the gain stage (input-referred LSB).
func TestOffsetDACBeforeGain(t *testing.T) {
	seq := replaceAll(t, demoFile(t, "brx200-sequence.yaml"),
		"lsb: 12.2 uV                 # per code, at the output", "lsb: 61 nV",
		"placement: after_gain", "placement: before_gain")
	e, cfg := kindsBench{seq: seq, set: map[string]map[string]string{"dut": {"offset_trim": "before", "defect_rate": "0"}}}.open(t)
	for i := range 5 {
		rec := runReplayed(t, e, cfg, fmt.Sprintf("BRX-%05d", 200+i))
		if rec.Verdict != sequencer.Pass {
			t.Fatalf("%s: verdict %s: %v %s", rec.Serial, rec.Verdict, rec.Reasons, rec.Fault)
		}
		// One input-referred code moves the output by 61 nV · 200 = 12.2 µV; the
		// trimmed offset is within half of that plus the fits' noise (3u).
		u := math.Sqrt(rec.Fits[0].Cov[0][0] + rec.Fits[1].Cov[0][0])
		if po := resultOf(t, rec, sequencer.ResPostOffset).Value; math.Abs(po) > 6.1e-6+3*u {
			t.Errorf("%s: post offset %.2f µV", rec.Serial, po*1e6)
		}
	}
}

// demoSteps is the demo sequence with edits.
func demoSteps(t *testing.T, pairs ...string) string {
	t.Helper()
	return replaceAll(t, demoFile(t, "brx200-sequence.yaml"), pairs...)
}

const preSweep = `  - kind: sweep                  # the unit as found
    name: pre-trim
    from: -10 mV
    to: 10 mV
    points: 11
`

const verifyFit = `      max_error: post_max_error
      noise: post_noise
      offset_change: trim_offset_change  # shared instrument errors cancel: u ≈ 3 µV
      gain_change: trim_gain_change
`

// 3. An explicit list of levels with repeats (the lack of fit is then the F test
// against pure error), a window on a fit, and an order-2 fit.
func TestLevelsWindowAndOrder2(t *testing.T) {
	seq := demoSteps(t, preSweep, `  - kind: sweep
    name: pre-trim
    levels: [-10 mV, -6 mV, 0 V, 0 V, 3 mV, 10 mV, 0 V]
`,
		"      nonlinearity: pre_nonlinearity\n", "      nonlinearity: pre_nonlinearity\n      lack_of_fit: pre_lack_of_fit\n",
		verifyFit, verifyFit+`
  - kind: fit
    name: verify window
    sweep: verify
    window: {from: -4 mV, to: 4 mV}
    results: {offset: window_offset, lack_of_fit: window_lack_of_fit}

  - kind: fit
    name: verify quadratic
    sweep: verify
    order: 2
    results: {offset: quad_offset, lack_of_fit: quad_lack_of_fit}
`)
	e, cfg := kindsBench{seq: seq, set: map[string]map[string]string{"dut": {"defect_rate": "0"}}}.open(t)
	for i := range 4 {
		rec := runReplayed(t, e, cfg, fmt.Sprintf("BRX-%05d", 300+i))
		if rec.Verdict != sequencer.Pass {
			t.Fatalf("%s: verdict %s: %v %s", rec.Serial, rec.Verdict, rec.Reasons, rec.Fault)
		}
		if n := len(rec.Sweeps[0].Points); n != 7 || rec.Sweeps[0].Points[6].Stimulus != 0 || rec.Sweeps[0].Points[1].Stimulus != -6e-3 {
			t.Fatalf("pre-trim sweep not run at the listed levels: %+v", rec.Sweeps[0].Points)
		}
		fits := map[string]sequencer.FitSummary{}
		for _, f := range rec.Fits {
			fits[f.Step] = f
		}
		if lof := fits["pre-trim fit"].LackOfFit; lof == nil || lof.Method != "F" {
			t.Errorf("pre-trim fit over repeated levels: lack of fit %+v, want the F test", lof)
		} else if r := resultOf(t, rec, "pre_lack_of_fit"); !r.Valid || r.Value != lof.Statistic {
			t.Errorf("pre_lack_of_fit %+v, fit says %g", r, lof.Statistic)
		}
		// The verify sweep's levels are −10..10 mV in 2 mV steps: −4, −2, 0, 2 and
		// 4 mV lie in the window (hand-counted).
		if w := fits["verify window"]; len(w.Residuals) != 5 {
			t.Errorf("window fit has %d residuals, want 5", len(w.Residuals))
		}
		if lof := fits["verify window"].LackOfFit; lof == nil || lof.Method != "chi2/dof" {
			t.Errorf("window fit lack of fit %+v, want chi2/dof (no repeated levels)", lof)
		}
		q := fits["verify quadratic"]
		if q.Order != 2 || len(q.Coef) != 3 || len(q.Residuals) != 11 {
			t.Errorf("quadratic fit %+v", q)
		}
		if r := resultOf(t, rec, "quad_lack_of_fit"); !r.Valid || q.LackOfFit == nil || r.Value != q.LackOfFit.Statistic {
			t.Errorf("quad_lack_of_fit %+v", r)
		}
	}
}

// An order-2 fit follows the bend of rail compression that a line cannot: a
// sweep that drives the output into the knee below the 5 V rail.
func TestOrder2FollowsRailCompression(t *testing.T) {
	seq := `sequence: {product: BRX-200, revision: C}
requires: [source, meter, dut]   # the card must be in the fixture to drive the output
limits: brx200-limits.yaml
ideal: {gain: 200, offset: 2.5 V, full_scale: 4 V}
meter: {range: 10 V, nplc: 1}
steps:
  - kind: sweep
    name: near rail
    from: 11 mV
    to: 12.4 mV
    points: 13
    settle: 20 ms
    readings: 4
  - kind: fit
    name: line
    sweep: near rail
    results: {nonlinearity: line_nonlinearity}
  - kind: fit
    name: quadratic
    sweep: near rail
    order: 2
    results: {nonlinearity: quad_nonlinearity}
`
	lim := withLimits(t, `  - name: line straight
    description: Nonlinearity of the line.
    unit: "%"
    uses: [line_nonlinearity]
    tolerance: {upper: 100}
`)
	e, cfg := kindsBench{seq: seq, lim: lim, set: ideal(map[string]string{"offset": "0 V", "gain_error": "0 ppm"})}.open(t)
	rec := runReplayed(t, e, cfg, "BRX-00400")
	if rec.Verdict != sequencer.Pass || len(rec.Fits) != 2 {
		t.Fatalf("verdict %s: %v %s", rec.Verdict, rec.Reasons, rec.Fault)
	}
	maxAbs := func(r []float64) (m float64) {
		for _, v := range r {
			m = math.Max(m, math.Abs(v))
		}
		return m
	}
	rms := func(r []float64) float64 {
		var ss float64
		for _, v := range r {
			ss += v * v
		}
		return math.Sqrt(ss / float64(len(r)))
	}
	line, quad := rec.Fits[0].Residuals, rec.Fits[1].Residuals
	t.Logf("residuals: line largest %.1f µV rms %.1f µV, quadratic largest %.1f µV rms %.1f µV",
		maxAbs(line)*1e6, rms(line)*1e6, maxAbs(quad)*1e6, rms(quad)*1e6)
	// 11 mV … 12.4 mV · 200 + 2.5 V = 4.7 … 4.98 V: mostly inside the 0.2 V knee
	// below the 5 V rail.
	if maxAbs(line) < 1e-3 {
		t.Fatalf("the sweep does not reach the rail's knee: line residual %.1f µV", maxAbs(line)*1e6)
	}
	// The knee is a tanh that starts at 4.8 V, not a parabola: a quadratic follows
	// it better, not exactly. Least squares guarantees the rms (equal weights); the
	// margins are common practice for "clearly smaller".
	if !(rms(quad) < rms(line)/1.5 && maxAbs(quad) < maxAbs(line)) {
		t.Errorf("the quadratic's residuals are not clearly smaller than the line's")
	}
}

// 4. skip_if: a unit already inside ±0.5 mV as found is not trimmed.
func TestSkipIf(t *testing.T) {
	skipTrim := demoSteps(t,
		"    pivot: 2.5 V                 # the output the gain trim scales about\n",
		"    pivot: 2.5 V\n    skip_if: abs(pre_offset) < 0.5e-3\n",
		"    command: \"NV STORE\"\n", "    command: \"NV STORE\"\n    skip_if: abs(pre_offset) < 0.5e-3\n")
	noCodeLimit := demoFile(t, "brx200-limits.yaml")
	noCodeLimit = noCodeLimit[:strings.Index(noCodeLimit, "  - name: trim headroom")]
	for _, c := range []struct {
		name, lim, offset string
		skipped           bool
		verdict           sequencer.Verdict
	}{
		// Hand-worked: 0.1 mV as found is inside 0.5 mV, so neither trim nor store
		// runs; the unit keeps its 0.1 mV (inside ±800 µV less U ≈ 150 µV).
		{"inside, limits without code limits", noCodeLimit, "0.1 mV", true, sequencer.Pass},
		// The demo's headroom limit uses the codes, which were not measured: an
		// invalid result fails every limit that uses it.
		{"inside, demo limits", "", "0.1 mV", true, sequencer.Fail},
		{"outside", "", "3.1 mV", false, sequencer.Pass},
	} {
		t.Run(c.name, func(t *testing.T) {
			e, cfg := kindsBench{seq: skipTrim, lim: c.lim, set: ideal(map[string]string{"offset": c.offset, "gain_error": "0 ppm"})}.open(t)
			rec := runReplayed(t, e, cfg, "BRX-00500")
			if rec.Verdict != c.verdict {
				t.Errorf("verdict %s, want %s: %v %s", rec.Verdict, c.verdict, rec.Reasons, rec.Fault)
			}
			for _, step := range []string{"trim", "store"} {
				want := sequencer.StepDone
				if c.skipped {
					want = sequencer.StepSkipped
				}
				if s := stepStatus(t, rec, step); s.Status != want {
					t.Errorf("step %s: %+v, want %s", step, s, want)
				}
			}
			if s := stepStatus(t, rec, "verify"); s.Status != sequencer.StepDone {
				t.Errorf("verify after a skipped trim: %+v", s)
			}
			for _, code := range []string{sequencer.ResOffsetCode, sequencer.ResGainCode} {
				r := resultOf(t, rec, code)
				if c.skipped && (r.Valid || !strings.Contains(r.Note, "not measured")) {
					t.Errorf("%s of an untrimmed unit: %+v", code, r)
				}
				if !c.skipped && !r.Valid {
					t.Errorf("%s of a trimmed unit: %+v", code, r)
				}
			}
			if c.skipped {
				near(t, "post offset", resultOf(t, rec, sequencer.ResPostOffset).Value, 0.1e-3, 2e-6)
				if c.verdict == sequencer.Fail && !strings.Contains(strings.Join(rec.Reasons, "; "), "trim headroom") {
					t.Errorf("reasons %v do not name the headroom limit", rec.Reasons)
				}
			}
		})
	}
	t.Run("over an invalid result the step runs", func(t *testing.T) {
		// One reading a point: the pre-trim noise has no estimate, so a condition
		// over it (which would hold at its value 0) must not skip the step.
		seq := demoSteps(t,
			"    readings: 8                  # readings per point (mean and SD kept)\n", "    readings: 1\n",
			"      nonlinearity: pre_nonlinearity\n", "      nonlinearity: pre_nonlinearity\n      noise: pre_noise\n",
			"    command: \"NV STORE\"\n", "    command: \"NV STORE\"\n    skip_if: pre_noise < 1\n")
		e, cfg := kindsBench{seq: seq, set: ideal(map[string]string{"offset": "3.1 mV", "gain_error": "0 ppm"})}.open(t)
		rec := runReplayed(t, e, cfg, "BRX-00501")
		if r := resultOf(t, rec, "pre_noise"); r.Valid {
			t.Fatalf("pre_noise valid from one reading a point: %+v", r)
		}
		s := stepStatus(t, rec, "store")
		if s.Status != sequencer.StepDone || !strings.Contains(s.Note, "pre_noise") {
			t.Errorf("store: %+v, want done with a note on pre_noise", s)
		}
		if !trimOf(t, rec, "offset").Stored {
			t.Error("codes not stored")
		}
	})
}

// 5. A command step whose reply does not match.
func TestCommandReplyMismatch(t *testing.T) {
	check := "  - kind: command\n    name: firmware check\n    send:\n      - query: \"FW?\"\n        expect: \"BRX200-FW 9.9.9\"\n"
	for _, c := range []struct {
		name, after, onMismatch string
		verdict                 sequencer.Verdict
	}{
		{"before any sweep", "  - kind: clear_trim", "", sequencer.Fail},
		{"after the pre-trim fit", "  - kind: trim", "", sequencer.Fail},
		{"as a fault", "  - kind: trim", "    on_mismatch: fault\n", sequencer.Fault},
	} {
		t.Run(c.name, func(t *testing.T) {
			seq := demoSteps(t, c.after, check+c.onMismatch+"\n"+c.after)
			e, cfg := kindsBench{seq: seq}.open(t)
			rec := runReplayed(t, e, cfg, "BRX-00600")
			if rec.Verdict != c.verdict {
				t.Fatalf("verdict %s, want %s: %v %s", rec.Verdict, c.verdict, rec.Reasons, rec.Fault)
			}
			msg := rec.Fault + strings.Join(rec.Reasons, "; ")
			for _, want := range []string{`"firmware check"`, `"BRX200-FW 2.3.1"`, `"BRX200-FW 9.9.9"`, `"FW?"`} {
				if !strings.Contains(msg, want) {
					t.Errorf("message %q does not name %s", msg, want)
				}
			}
			if c.verdict != sequencer.Fail {
				return
			}
			after := false
			for _, s := range rec.Steps {
				switch {
				case s.Name == "firmware check":
					after = true
				case after && s.Status != sequencer.StepNotReached:
					t.Errorf("step %q after the mismatch: %+v", s.Name, s)
				}
			}
			if !after {
				t.Fatal("the command step is not in the record")
			}
		})
	}
}

// 6. A trim that needs a code outside the DAC's range fails the unit.
func TestSaturatedTrim(t *testing.T) {
	// 40 mV of offset needs −40 mV / 12.2 µV = −3278.7 codes from mid-scale 2048:
	// code −1230.7, outside 0..4095 (hand-worked).
	e, cfg := kindsBench{seq: demoFile(t, "brx200-sequence.yaml"), set: ideal(map[string]string{"offset": "40 mV", "gain_error": "0 ppm"})}.open(t)
	rec := runReplayed(t, e, cfg, "BRX-00700")
	if rec.Verdict != sequencer.Fail {
		t.Fatalf("verdict %s: %v %s", rec.Verdict, rec.Reasons, rec.Fault)
	}
	if r := strings.Join(rec.Reasons, "; "); !strings.Contains(r, "offset trim needs code -1230.7") || !strings.Contains(r, "outside the DAC's range 0..4095") {
		t.Errorf("reasons %q", r)
	}
	tc := trimOf(t, rec, "offset")
	if !tc.Saturated || tc.Written || tc.Code != 0 {
		t.Errorf("offset trim %+v, want saturated at 0 and not written", tc)
	}
	for _, name := range []string{sequencer.ResPostOffset, sequencer.ResPostGainError, sequencer.ResPostNoise} {
		if r := resultOf(t, rec, name); r.Valid || r.Note != "not measured: trim saturated" {
			t.Errorf("%s: %+v", name, r)
		}
	}
	for _, step := range []string{"store", "verify", "verify fit"} {
		if s := stepStatus(t, rec, step); s.Status != sequencer.StepNotReached {
			t.Errorf("step %s: %+v", step, s)
		}
	}
}

// 7. A second verify sweep after the trim, with results of its own.
func TestSecondVerifySweep(t *testing.T) {
	second := func(to string) string {
		return verifyFit + `
  - kind: sweep
    name: recheck
    from: -10 mV
    to: ` + to + `
    points: 6
    settle: 20 ms
    readings: 4

  - kind: fit
    name: recheck fit
    sweep: recheck
    results:
      offset: recheck_offset
      gain_error: recheck_gain_error
      nonlinearity: recheck_nonlinearity
      max_error: recheck_max_error
`
	}
	seq := demoSteps(t, verifyFit, second("10 mV"))
	b := kindsBench{seq: seq, set: map[string]map[string]string{"dut": {"defect_rate": "0"}}}
	e, cfg := b.open(t)
	rec := runReplayed(t, e, cfg, "BRX-00800")
	if rec.Verdict != sequencer.Pass {
		t.Fatalf("verdict %s: %v %s", rec.Verdict, rec.Reasons, rec.Fault)
	}
	var got []string
	for _, sw := range rec.Sweeps {
		got = append(got, sw.Name+"/"+sw.Stage.String())
	}
	want := []string{"pre-trim/" + sequencer.AsFound.String(), "verify/" + sequencer.AsLeft.String(), "recheck/" + sequencer.AsLeft.String()}
	if strings.Join(got, " ") != strings.Join(want, " ") {
		t.Errorf("sweeps %v, want %v", got, want)
	}
	for _, name := range []string{"recheck_offset", "recheck_gain_error"} {
		if r := resultOf(t, rec, name); !r.Valid || r.Step != "recheck fit" || r.Stage != sequencer.AsLeft {
			t.Errorf("%s: %+v", name, r)
		}
	}
	// Every fit result with an uncertainty is predicted, for every sweep's fit.
	// (Noise needs repeated readings and lack of fit has no uncertainty; the
	// prediction takes one noiseless reading a level.)
	pred := sequencer.PredictUncertainty(cfg.Station, cfg.Sequence)
	for _, name := range []string{sequencer.ResPreOffset, sequencer.ResPreGainError, sequencer.ResPreNonlinearity,
		sequencer.ResPostOffset, sequencer.ResPostGainError, sequencer.ResPostNonlinearity, sequencer.ResPostMaxError,
		"recheck_offset", "recheck_gain_error", "recheck_nonlinearity", "recheck_max_error"} {
		if v, ok := pred[name]; !ok || !(v.U > 0) {
			t.Errorf("no predicted U for %s: %+v", name, v)
		}
	}
	// The recheck's own U follows its own sweep: 6 levels, not the verify's 11.
	// (Compared by u: two stated U can round to the same two digits.)
	if pred["recheck_offset"].Std == pred[sequencer.ResPostOffset].Std {
		t.Errorf("recheck u(offset) equals verify's (%g): predicted from the wrong sweep?", pred["recheck_offset"].Std)
	}

	// A recheck beyond the station's 50 mV cap is refused at load, naming the step.
	over := kindsBench{seq: demoSteps(t, verifyFit, second("60 mV"))}.config(t)
	err := sequencer.CheckCaps(over.Station, over.Sequence)
	if !errors.Is(err, sequencer.ErrSafety) || !strings.Contains(err.Error(), `step "recheck"`) || strings.Contains(err.Error(), `step "verify"`) {
		t.Errorf("CheckCaps: %v", err)
	}
	if _, err := sequencer.Open(context.Background(), over); !errors.Is(err, sequencer.ErrSafety) {
		t.Errorf("Open of a sequence beyond the cap: %v", err)
	}
}

// 8. The first layout and the step list are the same flow: for the same serials
// and seed they give identical records (the step list less its zero check, a
// kind the first layout never had).
func TestFirstLayoutMatchesStepList(t *testing.T) {
	first, err := os.ReadFile("testdata/brx200-sequence-first.yaml")
	if err != nil {
		t.Fatal(err)
	}
	// Many defective units, so that failing records are compared too.
	defects := map[string]map[string]string{"dut": {"defect_rate": "40 %"}}
	eFirst, cfgFirst := kindsBench{seq: string(first), set: defects}.open(t)
	eList, cfgList := kindsBench{seq: demoAsFirstLayout(t), set: defects}.open(t)
	verdicts := map[sequencer.Verdict]int{}
	for i := range 12 {
		serial := fmt.Sprintf("BRX-%05d", 900+i)
		a := runReplayed(t, eFirst, cfgFirst, serial)
		b := runReplayed(t, eList, cfgList, serial)
		verdicts[a.Verdict]++
		if d := sequencer.Differences(a, b); len(d) > 0 {
			t.Errorf("%s: first layout and step list differ:\n  %s", serial, strings.Join(d, "\n  "))
		}
		if len(a.Results) != len(b.Results) || len(a.Outcomes) != len(b.Outcomes) || len(a.Trims) != len(b.Trims) {
			t.Fatalf("%s: %d/%d results, %d/%d outcomes, %d/%d trims", serial, len(a.Results), len(b.Results),
				len(a.Outcomes), len(b.Outcomes), len(a.Trims), len(b.Trims))
		}
		for j := range a.Results {
			ra, rb := a.Results[j], b.Results[j]
			if ra.Name != rb.Name || ra.Value != rb.Value || ra.Valid != rb.Valid || ra.Unc != rb.Unc || ra.Stage != rb.Stage {
				t.Errorf("%s: result %d: first %+v, list %+v", serial, j, ra, rb)
			}
		}
		for j := range a.Trims {
			if a.Trims[j] != b.Trims[j] {
				t.Errorf("%s: trim %d: first %+v, list %+v", serial, j, a.Trims[j], b.Trims[j])
			}
		}
		for j := range a.Outcomes {
			if oa, ob := a.Outcomes[j], b.Outcomes[j]; outcomeText(oa) != outcomeText(ob) {
				t.Errorf("%s: outcome %q:\n first %s\n list  %s", serial, oa.Name, outcomeText(oa), outcomeText(ob))
			}
		}
		if strings.Join(a.Reasons, "\n") != strings.Join(b.Reasons, "\n") {
			t.Errorf("%s: reasons differ:\n first %v\n list  %v", serial, a.Reasons, b.Reasons)
		}
	}
	t.Logf("verdicts %v", verdicts)
	pa, pb := sequencer.PredictUncertainty(cfgFirst.Station, cfgFirst.Sequence), sequencer.PredictUncertainty(cfgList.Station, cfgList.Sequence)
	if fmt.Sprint(pa) != fmt.Sprint(pb) {
		t.Errorf("predicted uncertainties differ:\n first %v\n list  %v", pa, pb)
	}
}

// outcomeText is an outcome in full, as the record stores it.
func outcomeText(o limits.Outcome) string {
	b, err := json.Marshal(o)
	if err != nil {
		return err.Error()
	}
	return string(b)
}

// 9. The bench remembers what a unit stored: a retest's clear_trim records the
// codes the first run stored as the codes the unit held as found.
func TestRetestSeesStoredCodes(t *testing.T) {
	e, cfg := kindsBench{seq: demoFile(t, "brx200-sequence.yaml"), set: map[string]map[string]string{"dut": {"defect_rate": "0"}}}.open(t)
	first := runReplayed(t, e, cfg, "BRX-00950")
	if first.Verdict != sequencer.Pass {
		t.Fatalf("first run %s: %v %s", first.Verdict, first.Reasons, first.Fault)
	}
	other := runReplayed(t, e, cfg, "BRX-00951") // another unit in between
	retest := runReplayed(t, e, cfg, "BRX-00950")
	for _, dac := range []string{"gain", "offset"} {
		was, now := trimOf(t, first, dac), trimOf(t, retest, dac)
		if was.Before != 2048 || !was.Stored {
			t.Errorf("first run %s: %+v", dac, was)
		}
		if now.Before != was.Code {
			t.Errorf("retest %s: held %d as found, the first run stored %d", dac, now.Before, was.Code)
		}
		if o := trimOf(t, other, dac); o.Before != 2048 {
			t.Errorf("a fresh unit after a stored one holds %d as found", o.Before)
		}
	}
	// Cleared before the sweep, the retest measures the unit as found afresh: the
	// same codes again (the pre-trim fit sees the same unit; noise differs by at
	// most a code).
	for _, dac := range []string{"gain", "offset"} {
		if d := trimOf(t, retest, dac).Code - trimOf(t, first, dac).Code; d < -1 || d > 1 {
			t.Errorf("retest %s code differs by %d", dac, d)
		}
	}
}
