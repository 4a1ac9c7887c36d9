package sequencer_test

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"trimline/instruments"
	_ "trimline/instruments/generic"
	"trimline/instruments/scpi"
	"trimline/instruments/sim/serve"
	"trimline/instruments/sim/simtest"
	"trimline/sequencer"
)

// wireFiles returns a station file for the served bench srv (extra is appended to
// the source's entry, indented as its keys) and the demo sequence with fewer points
// and readings and a shorter aperture (quick replaces further text in it).
func wireFiles(t testing.TB, srv *serve.Server, extra string, quick ...string) (*sequencer.Station, *sequencer.Sequence) {
	t.Helper()
	a := srv.Addresses()
	station := fmt.Sprintf(`
station: {id: TW1, name: wire smoke test}
instruments:
  source:
    address: %s
    asset: S-1
    cal_due: 2099-12-31
    timeout: 500 ms
    accuracy: {of_reading: 20 ppm, of_range: 5 ppm, range: 100 mV}
%s
  meter:
    address: %s
    asset: M-1
    cal_due: 2099-12-31
    accuracy: {of_reading: 30 ppm, of_range: 4 ppm, range: 10 V}
  dut:
    address: %s
    asset: F-1
    templates: {load_unit: "FIXTURE LOAD {serial}"}
interlock: {role: dut, query: "LID?", closed: "CLOSED"}
safety: {source_rating: {voltage: 100 mV, current: 20 mA}, max_source_voltage: 50 mV, max_source_current: 10 mA}
output: {folder: out}
`, a["source"], extra, a["meter"], a["dut"])
	st, err := sequencer.ParseStation("wire-station.yaml", []byte(station))
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join("..", "sequences")
	data, err := os.ReadFile(filepath.Join(dir, "brx200-sequence.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	if quick == nil {
		quick = []string{"readings: 8", "readings: 2", "nplc: 1 ", "nplc: 0.1 ", "points: 11", "points: 5"}
	}
	text := strings.NewReplacer(quick...).Replace(string(data))
	seq, err := sequencer.ParseSequence(filepath.Join(dir, "brx200-sequence.yaml"), []byte(text), os.ReadFile)
	if err != nil {
		t.Fatal(err)
	}
	return st, seq
}

// wireEngine serves the quiet bench over loopback TCP and opens the engine on it
// through the generic drivers, with extra added to the station's source entry. The
// context ends with the test, after at most 30 s.
func wireEngine(t *testing.T, extra string) (*serve.Server, *sequencer.Engine, context.Context) {
	t.Helper()
	srv := simtest.Serve(t, serve.Options{Transport: "tcp"})
	st, seq := wireFiles(t, srv, extra)
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	t.Cleanup(cancel)
	e, err := sequencer.Open(ctx, sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test"})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { e.Close() })
	return srv, e, ctx
}

// TestEngineOverTheWire is a smoke test of the whole chain: the engine opens the
// served bench through the generic drivers by the addresses Server.Addresses gives,
// loads the unit over the wire (load_unit), reads the interlock and trims one unit.
// The sequence is the demo's with fewer readings and a shorter aperture so that it
// runs in about a second of real time. A dropped source link then ends a run as a
// FAULT with the source output off.
func TestEngineOverTheWire(t *testing.T) {
	if testing.Short() {
		t.Skip("real-time run")
	}
	srv, e, ctx := wireEngine(t, "")
	rec := e.Run(ctx, "BRX-000123")
	if rec.Verdict != sequencer.Pass {
		t.Fatalf("verdict %s: fault %q, reasons %q", rec.Verdict, rec.Fault, rec.Reasons)
	}
	if on, _ := srv.Bench().Source().State(); on {
		t.Fatal("the source output is on after the run")
	}

	srv.SetFault("source", serve.Fault{DropAfter: 5})
	rec = e.Run(ctx, "BRX-000124")
	if rec.Verdict != sequencer.Fault || !strings.Contains(rec.Fault, "link") {
		t.Fatalf("dropped source link: verdict %s, fault %q", rec.Verdict, rec.Fault)
	}
	if on, _ := srv.Bench().Source().State(); on {
		t.Fatal("the source output is on after the faulted run")
	}
	t.Logf("fault recorded: %s", rec.Fault)
}

// An entry an instrument queues while answering a reading (here the meter's
// -230 "Data corrupt or stale" after READ?) is a station fault: the engine reads
// every instrument's error queue after each point's readings, so the unit ends as
// FAULT with the output off and is never judged. The entry is injected after the
// first READ? of the pre-trim sweep (the zero check before it reads twice) and
// after the last READ? of the verify sweep (the last reading before the verdict).
func TestErrorQueuedByAReadingIsAFault(t *testing.T) {
	if testing.Short() {
		t.Skip("real-time run")
	}
	srv, e, ctx := wireEngine(t, "")
	stale := `-230,"Data corrupt or stale"`
	for _, c := range []struct {
		name   string
		fault  serve.Fault
		points int // points recorded when the fault stops the run
	}{
		{"first reading", serve.Fault{ErrorAfter: "READ?", ErrorAt: 3, ErrorEntry: stale}, 1},
		// The zero check's 2, 5 pre-trim points, then the trim; the verify
		// sweep's 5th READ? is the 12th.
		{"last reading", serve.Fault{ErrorAfter: "READ?", ErrorAt: 12, ErrorEntry: stale}, 5},
	} {
		t.Run(c.name, func(t *testing.T) {
			srv.SetFault("meter", c.fault)
			rec := e.Run(ctx, "BRX-000125")
			if rec.Verdict != sequencer.Fault || !strings.Contains(rec.Fault, "Data corrupt or stale") || !strings.Contains(rec.Fault, "-230") {
				t.Fatalf("verdict %s, fault %q, reasons %q: want FAULT naming the meter's -230 entry", rec.Verdict, rec.Fault, rec.Reasons)
			}
			if got := len(rec.Sweeps[len(rec.Sweeps)-1].Points); got != c.points {
				t.Errorf("the run went on for %d points of its last sweep, want %d", got, c.points)
			}
			if len(rec.Outcomes) != 0 {
				t.Errorf("a faulted unit was judged: %+v", rec.Outcomes)
			}
			if on, lvl := srv.Bench().Source().State(); on || lvl != 0 {
				t.Errorf("source left on=%v level=%g", on, lvl)
			}
			t.Logf("fault recorded: %s", rec.Fault)
		})
	}
}

// watchdogEntry is the station file text that arms the served source's output
// watchdog.
const watchdogEntry = `    settings: {watchdog: 300 ms}
    templates: {arm_watchdog: "OUTP:WATC {seconds}", disarm_watchdog: "OUTP:WATC OFF"}`

// With the source's output watchdog in the station file, the engine arms it at every
// step (so at every sweep point) and disarms it once the output is off. When the
// station stops talking in the middle of a sweep (its links closed under it, with
// no switch-off, as a kill -9 leaves the bench) the output stays on until the
// watchdog's time has run out, then the source switches it off and programs 0 V.
func TestWatchdogSwitchesOffAStationThatStoppedTalking(t *testing.T) {
	if testing.Short() {
		t.Skip("real-time run")
	}
	srv, e, ctx := wireEngine(t, watchdogEntry)
	if _, ok := e.Instrument("source").(instruments.OutputWatchdog); !ok {
		t.Fatalf("the source is a %T, without an output watchdog", e.Instrument("source"))
	}
	if rec := e.Run(ctx, "BRX-000126"); rec.Verdict != sequencer.Pass {
		t.Fatalf("verdict %s: fault %q, reasons %q", rec.Verdict, rec.Fault, rec.Reasons)
	}
	if n := srv.Count("source", "OUTP:WATC 0.3"); n < 10 {
		t.Errorf("the watchdog was armed %d times in a run of 10 sweep points, want at least once a point", n)
	}
	if armed, _, trips := srv.Bench().Source().Watchdog(); armed || trips != 0 {
		t.Errorf("after the run: watchdog armed=%v, trips %d; want disarmed, never run out", armed, trips)
	}

	// The station dies in the middle of the pre-trim sweep: with the output on,
	// every link of the engine closes and nothing switches the output off.
	done := make(chan *sequencer.Record)
	go func() { done <- e.Run(ctx, "BRX-000127") }()
	for on := false; !on; on, _ = srv.Bench().Source().State() {
		time.Sleep(time.Millisecond)
	}
	for _, r := range []string{sequencer.RoleSource, sequencer.RoleMeter, sequencer.RoleDUT} {
		if s, ok := e.Instrument(r).(interface{ Session() *scpi.Session }); ok {
			s.Session().Close()
		}
	}
	rec := <-done
	if rec.Verdict != sequencer.Fault {
		t.Fatalf("verdict %s after the links closed", rec.Verdict)
	}
	if on, _ := srv.Bench().Source().State(); !on {
		t.Fatal("the output went off at once: nothing is left for the watchdog to do")
	}
	time.Sleep(400 * time.Millisecond)
	if on, lvl := srv.Bench().Source().State(); on || lvl != 0 {
		t.Fatalf("400 ms after the station stopped talking: on=%v level=%g, want off at 0 V", on, lvl)
	}
	if _, _, trips := srv.Bench().Source().Watchdog(); trips != 1 {
		t.Errorf("watchdog trips %d, want 1", trips)
	}
}
