package sequencer_test

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	_ "trimline/instruments/generic"
	"trimline/instruments/sim/serve"
	"trimline/instruments/sim/simtest"
	"trimline/sequencer"
)

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
	srv := simtest.Serve(t, serve.Options{Transport: "tcp"})
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
`, a["source"], a["meter"], a["dut"])
	st, err := sequencer.ParseStation("wire-station.yaml", []byte(station))
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join("..", "sequences")
	data, err := os.ReadFile(filepath.Join(dir, "brx200-sequence.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	text := strings.NewReplacer("readings: 8", "readings: 2", "nplc: 1 ", "nplc: 0.1 ", "points: 11", "points: 5").Replace(string(data))
	seq, err := sequencer.ParseSequence(filepath.Join(dir, "brx200-sequence.yaml"), []byte(text), os.ReadFile)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
	defer cancel()
	e, err := sequencer.Open(ctx, sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test"})
	if err != nil {
		t.Fatal(err)
	}
	defer e.Close()
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
