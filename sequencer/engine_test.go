package sequencer_test

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

// plan is what the "faulty" test driver injects into a simulated bench.
type plan struct {
	reads        int
	panicAtRead  int        // panic in the Nth meter read (1-based); 0 = never
	errAtRead    int        // return an error from the Nth read
	cancelAtRead int        // call cancel during the Nth read
	cancel       func()     // used with cancelAtRead
	readbackSkew int        // added to every trim code read back after a write
	lidOpenAt    int        // the fixture lid reads OPEN from the Nth meter read on; 0 = always closed
	bench        *sim.Bench // the bench opened last

	serial string // the unit in the fixture answers SN? with it; "" = the loaded unit's serial

	checks       int // reads of the meter's error queue
	entryAtCheck int // the meter's error queue holds an entry at the Nth read of it (1-based); 0 = never
}

type faults struct {
	mu sync.Mutex
	plan
}

func (f *faults) set(p plan) {
	f.mu.Lock()
	defer f.mu.Unlock()
	f.plan = p
}

var inject = &faults{}

// faultyDriver opens a simulated bench (addresses faulty://source etc.) and wraps
// its meter and DUT so tests can make them misbehave.
type faultyDriver struct{}

func (faultyDriver) Open(ctx context.Context, u *url.URL, s instruments.Spec) (instruments.Instrument, error) {
	return nil, errors.New("faulty: open as a group")
}

func (faultyDriver) OpenGroup(ctx context.Context, specs []instruments.Spec) ([]instruments.Instrument, error) {
	simSpecs := make([]instruments.Spec, len(specs))
	for i, s := range specs {
		s.Address = strings.Replace(s.Address, "faulty://", "sim://", 1)
		simSpecs[i] = s
	}
	b, err := sim.NewBench(simSpecs)
	if err != nil {
		return nil, err
	}
	inject.mu.Lock()
	inject.bench = b
	inject.mu.Unlock()
	out := make([]instruments.Instrument, len(specs))
	for i, s := range specs {
		switch s.Role {
		case "source":
			out[i] = b.Source()
		case "meter":
			out[i] = &faultyMeter{b.Meter()}
		case "dut":
			out[i] = &faultyDUT{DUT: b.DUT()}
		}
	}
	return out, nil
}

type faultyMeter struct{ *sim.Meter }

func (m *faultyMeter) Read(ctx context.Context, n int) ([]instruments.Reading, error) {
	inject.mu.Lock()
	inject.reads++
	k := inject.reads
	f := inject.plan
	inject.mu.Unlock()
	switch k {
	case f.panicAtRead:
		panic("injected meter panic")
	case f.errAtRead:
		return nil, errors.New("injected: meter stopped answering")
	case f.cancelAtRead:
		f.cancel()
	}
	return m.Meter.Read(ctx, n)
}

// CheckErrors gives the simulated meter an error queue that is empty unless the
// plan puts an entry in it.
func (m *faultyMeter) CheckErrors(ctx context.Context) error {
	inject.mu.Lock()
	defer inject.mu.Unlock()
	inject.checks++
	if inject.checks == inject.entryAtCheck {
		return errors.New(`instrument error -230, "Data corrupt or stale"`)
	}
	return nil
}

type faultyDUT struct {
	*sim.DUT
	wrote bool
}

func (d *faultyDUT) Command(ctx context.Context, line string) error {
	d.wrote = strings.HasPrefix(line, "TRIM ")
	return d.DUT.Command(ctx, line)
}

func (d *faultyDUT) Query(ctx context.Context, line string) (string, error) {
	inject.mu.Lock()
	skew := inject.readbackSkew
	lidOpen := inject.lidOpenAt > 0 && inject.reads >= inject.lidOpenAt
	serial := inject.serial
	inject.mu.Unlock()
	if line == "SN?" && serial != "" {
		return serial, nil
	}
	if line == "LID?" {
		if lidOpen {
			return "OPEN", nil
		}
		return "CLOSED", nil
	}
	r, err := d.DUT.Query(ctx, line)
	if err == nil && skew != 0 && d.wrote && strings.HasPrefix(line, "TRIM ") {
		var c int
		fmt.Sscan(r, &c)
		r = fmt.Sprint(c + skew)
	}
	return r, err
}

func init() { instruments.Register("faulty", faultyDriver{}) }

// setup loads the demo files with settings overrides per role and opens an engine.
func setup(t testing.TB, scheme string, set map[string]map[string]string, limitFile string) *sequencer.Engine {
	t.Helper()
	return setupWith(t, scheme, set, limitFile, nil)
}

// setupWith is setup with a hook that edits the loaded station.
func setupWith(t testing.TB, scheme string, set map[string]map[string]string, limitFile string, edit func(*sequencer.Station)) *sequencer.Engine {
	t.Helper()
	st, err := sequencer.ParseStation("brx200-station.yaml", []byte(demoFile(t, "brx200-station.yaml")))
	if err != nil {
		t.Fatal(err)
	}
	for role, in := range st.Instruments {
		in.Address = strings.Replace(in.Address, "sim://", scheme+"://", 1)
		in.Settings = map[string]string{}
		for k, v := range set[role] {
			in.Settings[k] = v
		}
		st.Instruments[role] = in
	}
	if edit != nil {
		edit(st)
	}
	over := map[string]string{}
	if limitFile != "" {
		over["brx200-limits.yaml"] = limitFile
	}
	seq, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(demoFile(t, "brx200-sequence.yaml")), demoReader(t, over))
	if err != nil {
		t.Fatal(err)
	}
	e, err := sequencer.Open(context.Background(), sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test"})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { e.Close() })
	return e
}

// ideal makes every instrument error and noise zero, so outcomes are exactly
// predictable from the DUT model.
// openEngine opens st and seq on the bench with a test operator; the engine is
// closed when the test ends.
func openEngine(t testing.TB, st *sequencer.Station, seq *sequencer.Sequence) *sequencer.Engine {
	t.Helper()
	e, err := sequencer.Open(context.Background(), sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test"})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { e.Close() })
	return e
}

// loadFiles loads a station and a sequence file (and the limit file it names).
func loadFiles(t testing.TB, station, sequence string) (*sequencer.Station, *sequencer.Sequence) {
	t.Helper()
	st, err := sequencer.LoadStation(station)
	if err != nil {
		t.Fatal(err)
	}
	seq, err := sequencer.LoadSequence(sequence)
	if err != nil {
		t.Fatal(err)
	}
	return st, seq
}

// onIdealBench gives every instrument of st the ideal bench's settings.
func onIdealBench(st *sequencer.Station) {
	for role, in := range st.Instruments {
		in.Settings = ideal(nil)[role]
		st.Instruments[role] = in
	}
}

func ideal(dut map[string]string) map[string]map[string]string {
	d := map[string]string{"noise": "0 V", "crossover_step": "0 V", "dnl": "0", "defect": "none", "open_loop_gain": "0"}
	for k, v := range dut {
		d[k] = v
	}
	return map[string]map[string]string{
		"source": {"noise": "0 V", "gain_error": "0 ppm", "offset": "0 V", "thermal_emf": "0 V"},
		"meter":  {"noise": "0 V", "gain_error": "0 ppm", "offset": "0 V"},
		"dut":    d,
	}
}

func resultOf(t testing.TB, rec *sequencer.Record, name string) sequencer.Result {
	t.Helper()
	for _, r := range rec.Results {
		if r.Name == name {
			return r
		}
	}
	t.Fatalf("no result %q", name)
	return sequencer.Result{}
}

func TestKnownDUTGivesPredictableCodes(t *testing.T) {
	e := setup(t, "sim", ideal(map[string]string{"offset": "3.1 mV", "gain_error": "-2500 ppm"}), "")
	rec := e.Run(context.Background(), "BRX-00042")
	if rec.Verdict != sequencer.Pass {
		t.Fatalf("verdict %s: %v %s", rec.Verdict, rec.Reasons, rec.Fault)
	}
	// Hand-worked in TestComputeTrimHandWorked: gain code 2299, offset code 1793.
	var codes = map[string]int{}
	for _, tc := range rec.Trims {
		codes[tc.DAC] = tc.Code
		if tc.Readback != tc.Code || !tc.Stored || tc.Before != 2048 {
			t.Errorf("%s: %+v", tc.DAC, tc)
		}
	}
	if codes["gain"] != 2299 || codes["offset"] != 1793 {
		t.Fatalf("codes %v, want gain 2299 offset 1793", codes)
	}
	// Hand-worked: after trim the model gives slope 199.5·1.00251 = 200.000745 V/V
	// (+3.725 ppm) and intercept 2.5 + 1.00251·3.1 mV − 255·12.2 µV = 2.499996781 V
	// (−3.219 µV); the meter resolves 1 µV.
	near(t, "post offset", resultOf(t, rec, sequencer.ResPostOffset).Value, -3.219e-6, 1e-6)
	near(t, "post gain error", resultOf(t, rec, sequencer.ResPostGainError).Value, 3.725e-6, 0.2e-6)
	near(t, "pre offset", resultOf(t, rec, sequencer.ResPreOffset).Value, 3.1e-3, 1e-6)
	near(t, "pre gain error", resultOf(t, rec, sequencer.ResPreGainError).Value, -2500e-6, 0.1e-6)
	// Uncertainty, hand-worked from the demo station's specs (JCGM 100 §4.3.7,
	// rectangular a/√3; sensitivities of the intercept: meter gain −b0 ≈ −2.5 V,
	// meter offset −1, source offset −b1 = −200). The demo's zero check measured
	// the source offset on this noiseless bench with no scatter (JCGM 100
	// §4.2.3), only the meter's resolution in its two means, so its row replaces
	// the spec term (200·5 ppm·100 mV/√3 = 57.74 µV) by √2·1 µV/(2√3) = 0.41 µV:
	//   u(b0)² = (2.5·30 ppm/√3)² + (4 ppm·10 V/√3)² + (1 µV/(2√3))²/11 + (0.41 µV)²
	//   u(b0) = 49.08 µV (75.77 µV with the spec term); dof ∞ (no noise) so
	//   k = 2.000 at 95.45 %.
	//   u(b1)/b1 = √((30 ppm/√3)² + (20 ppm/√3)²) = 20.82 ppm.
	po := resultOf(t, rec, sequencer.ResPostOffset).Unc
	near(t, "u(post offset)", po.Std, 49.07e-6, 0.1e-6)
	near(t, "k", po.K, 2.000, 0.001)
	near(t, "k·u(post offset)", po.K*po.Std, 98.15e-6, 0.3e-6)
	// The stated U is k·u rounded up to two significant digits (JCGM 100:2008
	// §7.2.6 allows rounding up): 98.15 µV → 99 µV.
	if po.Expanded != 99e-6 {
		t.Errorf("U(post offset) = %v, want 99 µV: k·u = 98.15 µV rounded up (JCGM 100:2008 §7.2.6)", po.Expanded)
	}
	near(t, "u(post gain error)", resultOf(t, rec, sequencer.ResPostGainError).Unc.Std, 20.82e-6, 0.02e-6)
	if rec.Coverage != 0.9545 {
		t.Errorf("coverage %g", rec.Coverage)
	}
	if n := len(rec.Sweeps); n != 2 || len(rec.Sweeps[0].Points) != 11 || len(rec.Sweeps[0].Points[0].Readings) != 8 {
		t.Fatalf("sweeps not recorded in full: %d", n)
	}
	if !rec.Finished.After(rec.Started) {
		t.Error("times not recorded")
	}
	if on, lvl := simSource(t, e).State(); on || lvl != 0 {
		t.Errorf("source left on=%v level=%g", on, lvl)
	}
}

func simSource(t testing.TB, e *sequencer.Engine) *sim.Source {
	t.Helper()
	s, ok := e.Instrument("source").(*sim.Source)
	if !ok {
		t.Fatal("source is not simulated")
	}
	return s
}

// Over 1000 simulated healthy units the post-trim offset is within ½ LSB of the
// offset DAC plus the measurement noise for at least 99 % of them. The noise
// allowance is 3 standard uncertainties of the difference between the pre- and
// post-trim intercepts, as the fits themselves report them (common practice: a
// 3σ band).
func TestPostTrimOffsetWithinHalfLSB(t *testing.T) {
	if testing.Short() {
		t.Skip("1000 units")
	}
	e := setup(t, "sim", map[string]map[string]string{"dut": {"defect_rate": "0"}}, "")
	const n = 1000
	const halfLSB = 12.2e-6 / 2
	within, worst := 0, 0.0
	for i := range n {
		rec := e.Run(context.Background(), fmt.Sprintf("POP-%05d", i))
		if rec.Verdict == sequencer.Fault || len(rec.Fits) != 2 {
			t.Fatalf("unit %d: %s %s %v", i, rec.Verdict, rec.Fault, rec.Reasons)
		}
		post := resultOf(t, rec, sequencer.ResPostOffset).Value
		u := math.Sqrt(rec.Fits[0].Cov[0][0] + rec.Fits[1].Cov[0][0])
		if math.Abs(post) <= halfLSB+3*u {
			within++
		}
		worst = math.Max(worst, math.Abs(post))
	}
	t.Logf("%d of %d within ½ LSB + 3u; worst |post offset| %.2f µV", within, n, worst*1e6)
	if within < 990 {
		t.Fatalf("only %d of %d units within ½ LSB plus noise", within, n)
	}
}

// A flagged, NaN or infinite reading must never let a unit pass, even with a limit
// written so that NaN would slip through expr-lang (`!(x > lim)`): the engine stops
// the unit as a station fault (an overload on a range the unit's rails cannot reach
// is the station's problem) and judges nothing on it.
func TestFlaggedReadingsNeverPass(t *testing.T) {
	trap := `limit_set:
  name: trap
  revision: "1"
  product: BRX-200
limits:
  - name: negated offset
    description: written the dangerous way
    unit: uV
    uses: [post_offset]
    expr: "!(abs(post_offset) > 50)"
  - name: negated pre offset
    description: written the dangerous way
    unit: mV
    uses: [pre_offset]
    expr: "not (abs(pre_offset) > 20)"
`
	for _, flag := range []string{"overload", "nan"} {
		t.Run(flag, func(t *testing.T) {
			set := ideal(nil)
			set["meter"]["force_flag"] = flag
			e := setup(t, "sim", set, trap)
			rec := e.Run(context.Background(), "BRX-00001")
			if rec.Verdict != sequencer.Fault || !strings.Contains(rec.Fault, "meter reported "+flag) {
				t.Fatalf("verdict %s %q, want FAULT naming the %s", rec.Verdict, rec.Fault, flag)
			}
			for _, o := range rec.Outcomes {
				if o.Pass {
					t.Errorf("limit %q passed on flagged readings", o.Name)
				}
			}
			for _, r := range rec.Results {
				if r.Valid {
					t.Errorf("%s valid from %s readings", r.Name, flag)
				}
			}
			if on, _ := simSource(t, e).State(); on {
				t.Error("source left on")
			}
		})
	}
}

func TestSaturatedTrimFailsWithReason(t *testing.T) {
	// +30 mV offset needs an offset code below 0 (hand-worked in the trim test).
	e := setup(t, "sim", ideal(map[string]string{"offset": "30 mV", "gain_error": "0 ppm"}), "")
	rec := e.Run(context.Background(), "BRX-00003")
	if rec.Verdict != sequencer.Fail || !strings.Contains(strings.Join(rec.Reasons, "\n"), "offset trim needs code") {
		t.Fatalf("verdict %s reasons %v", rec.Verdict, rec.Reasons)
	}
	for _, tc := range rec.Trims {
		if tc.Stored {
			t.Error("a saturated trim was stored")
		}
	}
}

// Every exit path leaves the source output off: a failed step, an instrument
// error, a cancelled context and a panic.
func TestSourceOffOnEveryExitPath(t *testing.T) {
	cases := []struct {
		name    string
		plan    plan
		verdict sequencer.Verdict
		fault   string
	}{
		{"meter error", plan{errAtRead: 5}, sequencer.Fault, "meter stopped answering"},
		{"panic", plan{panicAtRead: 7}, sequencer.Fault, "internal error: injected meter panic"},
		{"cancelled", plan{cancelAtRead: 3}, sequencer.Aborted, "aborted"},
		{"read-back mismatch", plan{readbackSkew: 1}, sequencer.Fault, "read back"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			inject.set(plan{})
			e := setup(t, "faulty", ideal(nil), "")
			ctx, cancel := context.WithCancel(context.Background())
			defer cancel()
			inject.mu.Lock()
			bench := inject.bench
			inject.mu.Unlock()
			p := c.plan
			p.cancel, p.bench = cancel, bench
			inject.set(p)
			rec := e.Run(ctx, "BRX-00009")
			if rec.Verdict != c.verdict || !strings.Contains(rec.Fault, c.fault) {
				t.Fatalf("verdict %s fault %q, want %s containing %q", rec.Verdict, rec.Fault, c.verdict, c.fault)
			}
			if on, lvl := bench.Source().State(); on || lvl != 0 {
				t.Errorf("source left on=%v level=%g", on, lvl)
			}
			inject.set(plan{bench: bench})
			// The next unit runs after the fault.
			if rec := e.Run(context.Background(), "BRX-00010"); rec.Verdict == sequencer.Fault || rec.Verdict == sequencer.Aborted {
				t.Errorf("next unit: %s %s", rec.Verdict, rec.Fault)
			}
		})
	}
}

// Every instrument's error queue is read after each of the 22 points, after each
// of the zero check's two states and once more before the verdict: an entry
// there, after the last reading, still makes the unit a station fault that is
// never judged.
func TestErrorQueueReadBeforeTheVerdict(t *testing.T) {
	inject.set(plan{})
	e := setup(t, "faulty", ideal(nil), "")
	inject.mu.Lock()
	bench := inject.bench
	inject.mu.Unlock()
	inject.set(plan{bench: bench})
	if rec := e.Run(context.Background(), "BRX-00014"); rec.Verdict != sequencer.Pass {
		t.Fatalf("clean queue: %s %s %v", rec.Verdict, rec.Fault, rec.Reasons)
	}
	inject.mu.Lock()
	n := inject.checks
	inject.mu.Unlock()
	if n != 25 {
		t.Fatalf("the meter's error queue was read %d times in a run of 22 points and a zero check, want 25 (each point, each state and before the verdict)", n)
	}
	inject.set(plan{bench: bench, entryAtCheck: 25})
	rec := e.Run(context.Background(), "BRX-00015")
	if rec.Verdict != sequencer.Fault || !strings.Contains(rec.Fault, "before the verdict") || !strings.Contains(rec.Fault, "-230") {
		t.Fatalf("entry before the verdict: %s %q", rec.Verdict, rec.Fault)
	}
	if len(rec.Outcomes) != 0 {
		t.Errorf("a faulted unit was judged: %+v", rec.Outcomes)
	}
	if on, lvl := bench.Source().State(); on || lvl != 0 {
		t.Errorf("source left on=%v level=%g", on, lvl)
	}
}

// The interlock is read before the output goes on and between points; an open lid
// stops the run as a station fault with the output off.
func TestInterlockOpenStopsTheRun(t *testing.T) {
	lid := func(st *sequencer.Station) {
		st.Interlock = &sequencer.Interlock{Role: "dut", Query: "LID?", Closed: "CLOSED"}
	}
	inject.set(plan{})
	e := setupWith(t, "faulty", ideal(nil), "", lid)
	if rec := e.Run(context.Background(), "BRX-00011"); rec.Verdict != sequencer.Pass {
		t.Fatalf("closed lid: %s %s %v", rec.Verdict, rec.Fault, rec.Reasons)
	}
	inject.mu.Lock()
	bench := inject.bench
	inject.mu.Unlock()
	// The demo's zero check reads the lid twice (before it programs 0 and
	// before the output goes on), the sweep once a point: the 6th read is the
	// sweep's 5th point.
	inject.set(plan{bench: bench, lidOpenAt: 6})
	rec := e.Run(context.Background(), "BRX-00012")
	if rec.Verdict != sequencer.Fault || !strings.Contains(rec.Fault, "interlock open") {
		t.Fatalf("open lid: %s %q", rec.Verdict, rec.Fault)
	}
	if got := len(rec.Sweeps[0].Points); got != 4 {
		t.Errorf("run went on for %d points after the lid opened at the 6th read", got)
	}
	if d := rec.FaultDetail; d == nil || d.Role != "dut" || d.Said != `"OPEN" to "LID?" (closed is "CLOSED")` {
		t.Errorf("fault detail %+v, want the dut port's lid answer", d)
	}
	if on, _ := bench.Source().State(); on {
		t.Error("source left on with the lid open")
	}
}

func TestStepDeadline(t *testing.T) {
	// A step that takes longer than the station's step deadline is a fault. A sweep
	// point needs at least 180 ms (20 ms settle + 8 readings at 1 PLC), which a
	// 200 ms deadline allows at load (CheckTiming); the meter's real-clock latency
	// of 300 ms then overruns it.
	e := setupWith(t, "sim", map[string]map[string]string{"meter": {"time": "real", "latency": "300ms"}}, "", func(st *sequencer.Station) {
		st.StepDeadline = 200 * time.Millisecond
	})
	rec := e.Run(context.Background(), "BRX-00013")
	if rec.Verdict != sequencer.Fault || !strings.Contains(rec.Fault, "step deadline") {
		t.Fatalf("%s %q", rec.Verdict, rec.Fault)
	}
	// The step overran while the meter was reading: the meter is named.
	if d := rec.FaultDetail; d == nil || d.Role != "meter" || d.Said == "" {
		t.Errorf("fault detail %+v, want the meter", d)
	}
}

// A limit file that refuses to run where the station cannot reach its minimum TUR
// stops the station before any unit (ANSI/NCSL Z540.3-2006 §5.3 ratio; with the
// demo's zero check in place of the source's offset spec, u(post offset) is
// 49.1 µV on paper, so the station reaches about 8.2:1 on ±800 µV and ±50 µV
// gives about 0.52:1).
func TestTURRefuseStopsTheStation(t *testing.T) {
	lim := strings.Replace(demoFile(t, "brx200-limits.yaml"), "tur_policy: warn", "tur_policy: refuse", 1)
	lim = strings.Replace(lim, "tolerance: {lower: -800, upper: 800}", "tolerance: {lower: -50, upper: 50}", 1)
	st, seq := demoFiles(t, map[string]string{"brx200-limits.yaml": lim})
	checks, err := sequencer.CheckTUR(st, seq)
	if !errors.Is(err, sequencer.ErrTUR) || !strings.Contains(err.Error(), "offset after trim") {
		t.Fatalf("want ErrTUR naming the limit, got %v", err)
	}
	for _, c := range checks {
		if c.Limit == "offset after trim" && (c.TUR < 0.49 || c.TUR > 0.55) {
			t.Errorf("predicted TUR %.3f, want ≈ 0.52 (100 µV / (2·1.96·49.1 µV))", c.TUR)
		}
	}
	if _, err := sequencer.Open(context.Background(), sequencer.Config{Station: st, Sequence: seq}); !errors.Is(err, sequencer.ErrTUR) {
		t.Fatalf("Open: %v", err)
	}
}

// The Monte Carlo evaluation (JCGM 101:2008) chosen in the sequence file gives the
// same standard uncertainties as the law of propagation (JCGM 100) within 5 % on a
// realistic unit, and the record says which method produced them.
func TestMonteCarloOptionAgreesWithGUM(t *testing.T) {
	run := func(method string) *sequencer.Record {
		st, err := sequencer.ParseStation("brx200-station.yaml", []byte(demoFile(t, "brx200-station.yaml")))
		if err != nil {
			t.Fatal(err)
		}
		src := demoFile(t, "brx200-sequence.yaml")
		if method != "" {
			src += "\nuncertainty: {method: " + method + ", trials: 20000}\n"
		}
		seq, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(src), demoReader(t, nil))
		if err != nil {
			t.Fatal(err)
		}
		e, err := sequencer.Open(context.Background(), sequencer.Config{Station: st, Sequence: seq})
		if err != nil {
			t.Fatal(err)
		}
		defer e.Close()
		return e.Run(context.Background(), "BRX-00031")
	}
	gum, mc := run(""), run("monte_carlo")
	for _, n := range []string{sequencer.ResPreOffset, sequencer.ResPreGainError, sequencer.ResPostOffset, sequencer.ResPostGainError} {
		g, m := resultOf(t, gum, n), resultOf(t, mc, n)
		if g.Unc.Method != "GUM" || m.Unc.Method != "MC" {
			t.Errorf("%s: methods %q %q", n, g.Unc.Method, m.Unc.Method)
		}
		r := m.Unc.Std / g.Unc.Std
		t.Logf("%s: u(MC)/u(GUM) = %.4f", n, r)
		if r < 0.95 || r > 1.05 {
			t.Errorf("%s: u(MC)/u(GUM) = %.3f, want within 5 %%", n, r)
		}
	}
}

// Replay recomputes a record from its raw readings and agrees with what the
// engine recorded, exactly; a changed limit shows up as a difference.
func TestReplayReproducesTheRecord(t *testing.T) {
	st, seq := demoFiles(t, nil)
	cfg := sequencer.Config{Station: st, Sequence: seq}
	e, err := sequencer.Open(context.Background(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	defer e.Close()
	verdicts := map[sequencer.Verdict]int{}
	for i := 1; i <= 25; i++ {
		rec := e.Run(context.Background(), fmt.Sprintf("BRX-%05d", i))
		again, err := sequencer.Replay(cfg, rec)
		if err != nil {
			t.Fatal(err)
		}
		if d := sequencer.Differences(rec, again); len(d) > 0 {
			t.Errorf("%s: replay differs: %v", rec.Serial, d)
		}
		verdicts[rec.Verdict]++
	}
	if verdicts[sequencer.Fail] == 0 {
		t.Errorf("seed 8's first 25 units include failures, got %v", verdicts)
	}
	// A tightened limit: the replay under it reports the flip.
	lim := strings.Replace(demoFile(t, "brx200-limits.yaml"), "tolerance: {lower: -500, upper: 500}", "tolerance: {lower: -1, upper: 1}", 1)
	tight, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(demoFile(t, "brx200-sequence.yaml")), demoReader(t, map[string]string{"brx200-limits.yaml": lim}))
	if err != nil {
		t.Fatal(err)
	}
	rec := e.Run(context.Background(), "BRX-00001")
	again, err := sequencer.Replay(sequencer.Config{Station: st, Sequence: tight}, rec)
	if err != nil {
		t.Fatal(err)
	}
	if d := sequencer.Differences(rec, again); len(d) == 0 {
		t.Error("a tightened gain limit changed nothing in the replay")
	}
}

// The station file may pin the model and serial an instrument must report; the
// wrong instrument on the bench refuses to run (it would void traceability).
func TestPinnedIdentityMismatchRefuses(t *testing.T) {
	st, seq := demoFiles(t, nil)
	m := st.Instruments["meter"]
	m.Model = "DV-99"
	st.Instruments["meter"] = m
	_, err := sequencer.Open(context.Background(), sequencer.Config{Station: st, Sequence: seq})
	if err == nil || !strings.Contains(err.Error(), "wrong instrument") || !strings.Contains(err.Error(), "DV-99") {
		t.Fatalf("want a refusal naming the pinned model, got %v", err)
	}
}
