package sequencer_test

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"trimline/sequencer"
)

// SaturatedOFX10 runs one OFX-10 card whose offset (12 mV) is beyond its offset
// DAC's reach, so the trim saturates and ends the run.
func saturatedOFX10(t *testing.T) *sequencer.Record {
	t.Helper()
	src := filepath.Join("testdata", "ofx10")
	data, err := os.ReadFile(filepath.Join(src, "ofx10-station.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	const lsb = "      offset_lsb: 20 uV\n"
	if !strings.Contains(string(data), lsb) {
		t.Fatal("the station's offset_lsb is not where the test expects it")
	}
	path := filepath.Join(t.TempDir(), "ofx10-station.yaml")
	if err := os.WriteFile(path, []byte(strings.Replace(string(data), lsb, lsb+"      offset: 12 mV\n", 1)), 0o644); err != nil {
		t.Fatal(err)
	}
	st, seq := loadFiles(t, path, filepath.Join(src, "ofx10-sequence.yaml"))
	e := openEngine(t, st, seq)
	rec := e.Run(context.Background(), "OFX-0001")
	if rec.Verdict != sequencer.Fail || len(rec.Trims) != 1 || !rec.Trims[0].Saturated || rec.Trims[0].Written {
		t.Fatalf("verdict %s, trims %+v: want FAIL with the offset trim saturated and not written", rec.Verdict, rec.Trims)
	}
	return rec
}

// The step that ended the run says so, and each step not reached names it; a
// toleranced limit left unmeasured keeps its tolerance, an expression limit has none.
func TestSaturatedTrimEndsTheRunAtItsStep(t *testing.T) {
	rec := saturatedOFX10(t)
	notes := map[string]sequencer.StepRun{}
	for _, s := range rec.Steps {
		notes[s.Name] = s
	}
	if s := notes["trim"]; s.Status != sequencer.StepDone || s.Note != "ended the run: trim saturated" {
		t.Errorf("trim step %+v: want done, noting that it ended the run", s)
	}
	if s := notes["as left"]; s.Status != sequencer.StepNotReached || s.Note != `the run ended at step "trim": trim saturated` {
		t.Errorf("as left step %+v: want not reached, naming the step that ended the run", s)
	}
	for _, o := range rec.Outcomes {
		switch o.Name {
		case "offset after trim":
			if o.Decision != nil || o.Tolerance == nil || o.Tolerance.Lower == nil || *o.Tolerance.Lower != -1000 || o.Pass {
				t.Errorf("%s: decision %v, tolerance %+v: want the tolerance as written, no decision, failed", o.Name, o.Decision, o.Tolerance)
			}
		case "trim headroom":
			if o.Tolerance != nil {
				t.Errorf("%s: an expression limit has a tolerance %+v", o.Name, o.Tolerance)
			}
		}
	}
}
