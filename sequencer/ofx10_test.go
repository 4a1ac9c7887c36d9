package sequencer_test

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	_ "trimline/instruments/generic"
	"trimline/instruments/sim/serve"
	"trimline/sequencer"
)

// The README's worked second product (Writing a sequence): an offset-only card
// with a 10-bit two's-complement trim DAC written in hex behind an unlock
// command, on station roles named by the station file. Its three files are in
// testdata/ofx10 (the README shows them byte for byte: see
// TestReadmeSequenceExamplesLoad), and they trim simulated units to PASS.
func TestSecondProductRunsOnTheSimulator(t *testing.T) {
	dir := filepath.Join("testdata", "ofx10")
	st, seq := loadFiles(t, filepath.Join(dir, "ofx10-station.yaml"), filepath.Join(dir, "ofx10-sequence.yaml"))
	e := openEngine(t, st, seq)
	for _, serial := range []string{"OFX-0001", "OFX-0002", "OFX-0003", "OFX-0004", "OFX-0005"} {
		rec := e.Run(context.Background(), serial)
		if rec.Verdict != sequencer.Pass {
			t.Errorf("%s: verdict %s, want PASS; fault %q, reasons %q", serial, rec.Verdict, rec.Fault, rec.Reasons)
			continue
		}
		if len(rec.Trims) != 1 || rec.Trims[0].DAC != "offset" || !rec.Trims[0].Stored {
			t.Errorf("%s: trims %+v, want the offset code written and stored", serial, rec.Trims)
		}
		pre, post := resultOf(t, rec, "pre_offset"), resultOf(t, rec, "post_offset")
		t.Logf("%s: offset %.1f µV → %.1f µV, code %d", serial, pre.Value*1e6, post.Value*1e6, rec.Trims[0].Code)
	}
}

// Without its unlock step the same card refuses the first trim write, and the
// run is a station fault that names the card's answer.
func TestSecondProductLockedWithoutUnlock(t *testing.T) {
	dir := filepath.Join("testdata", "ofx10")
	st, err := sequencer.LoadStation(filepath.Join(dir, "ofx10-station.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	data, err := os.ReadFile(filepath.Join(dir, "ofx10-sequence.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	unlock := "  - kind: command                # the card refuses trim writes until unlocked\n    name: unlock\n    port: card\n    send:\n      - command: \"UNLOCK 5A17\"\n\n"
	if !strings.Contains(string(data), unlock) {
		t.Fatal("the unlock step is not where the test expects it")
	}
	locked := strings.Replace(string(data), unlock, "", 1)
	seq, err := sequencer.ParseSequence(filepath.Join(dir, "ofx10-sequence.yaml"), []byte(locked), os.ReadFile)
	if err != nil {
		t.Fatal(err)
	}
	e := openEngine(t, st, seq)
	rec := e.Run(context.Background(), "OFX-0001")
	if rec.Verdict != sequencer.Fault || !strings.Contains(rec.Fault, "locked") {
		t.Errorf("verdict %s, fault %q: want FAULT naming the lock", rec.Verdict, rec.Fault)
	}
}

// The OFX-10 station names its roles input, dmm and card; served over loopback
// TCP, the generic drivers open each by the kind the station file gives it (not
// by its name), and a unit trims to PASS with every instrument's kind recorded.
func TestSecondProductRunsOverTheWire(t *testing.T) {
	if testing.Short() {
		t.Skip("real-time run")
	}
	dir := filepath.Join("testdata", "ofx10")
	sim, err := sequencer.LoadStation(filepath.Join(dir, "ofx10-station.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	srv, err := serve.Start(ctx, sim.Specs(sim.Roles()), serve.Options{Transport: "tcp"})
	if err != nil {
		t.Fatal(err)
	}
	defer srv.Close()
	settings, templates := srv.Wiring()
	if templates["card"]["load_unit"] == "" || settings["input"]["watchdog"] == "" {
		t.Fatalf("served wiring by role: settings %v, templates %v", settings, templates)
	}
	data, err := sim.Rewired(srv.Addresses(), sequencer.Served{Settings: settings, Templates: templates})
	if err != nil {
		t.Fatal(err)
	}
	st, err := sequencer.ParseStation(filepath.Join(dir, "ofx10-station-tcp.yaml"), data)
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range []string{"input", "dmm", "card"} {
		if a := st.Instruments[r].Address; !strings.HasPrefix(a, "tcp://") {
			t.Fatalf("%s at %s, want a served tcp:// address", r, a)
		}
	}
	seq, err := sequencer.LoadSequence(filepath.Join(dir, "ofx10-sequence.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	e, err := sequencer.Open(ctx, sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test"})
	if err != nil {
		t.Fatal(err)
	}
	defer e.Close()
	rec := e.Run(ctx, "OFX-0001")
	if rec.Verdict != sequencer.Pass {
		t.Fatalf("verdict %s, want PASS; fault %q, reasons %q", rec.Verdict, rec.Fault, rec.Reasons)
	}
	kinds := map[string]sequencer.RoleKind{}
	for _, in := range rec.Instruments {
		kinds[in.Role] = in.Kind
	}
	want := map[string]sequencer.RoleKind{"input": sequencer.VoltageSource, "dmm": sequencer.VoltMeter, "card": sequencer.DUTPort}
	for r, k := range want {
		if kinds[r] != k {
			t.Errorf("record: %s has kind %q, want %q", r, kinds[r], k)
		}
	}
	if on, _ := srv.Bench().Source().State(); on {
		t.Error("the source output is on after the run")
	}
}
