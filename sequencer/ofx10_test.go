package sequencer_test

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"trimline/sequencer"
)

// The README's worked second product (Writing a sequence): an offset-only card
// with a 10-bit two's-complement trim DAC written in hex behind an unlock
// command, on station roles named by the station file. Its three files are in
// testdata/ofx10 (the README shows them byte for byte: see
// TestReadmeSequenceExamplesLoad), and they trim simulated units to PASS.
func TestSecondProductRunsOnTheSimulator(t *testing.T) {
	dir := filepath.Join("testdata", "ofx10")
	st, err := sequencer.LoadStation(filepath.Join(dir, "ofx10-station.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	seq, err := sequencer.LoadSequence(filepath.Join(dir, "ofx10-sequence.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	e, err := sequencer.Open(context.Background(), sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test"})
	if err != nil {
		t.Fatal(err)
	}
	defer e.Close()
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
	e, err := sequencer.Open(context.Background(), sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test"})
	if err != nil {
		t.Fatal(err)
	}
	defer e.Close()
	rec := e.Run(context.Background(), "OFX-0001")
	if rec.Verdict != sequencer.Fault || !strings.Contains(rec.Fault, "locked") {
		t.Errorf("verdict %s, fault %q: want FAULT naming the lock", rec.Verdict, rec.Fault)
	}
}
