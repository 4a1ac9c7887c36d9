package sequencer_test

import (
	"context"
	"errors"
	"strings"
	"testing"

	"trimline/sequencer"
)

// measureSteps are a zero check and a reference check, before the trim: the
// unit as found.
const measureSteps = `  - kind: measure
    name: zero check
    settle: 50 ms
    readings: 4
    results: {mean: zero_output, error: zero_error, noise: zero_noise}

  - kind: measure
    name: reference check
    level: 5 mV
    settle: 50 ms
    readings: 4
    results: {mean: ref_output, error: ref_error, noise: ref_noise}

`

// measureFiles loads the demo files with the measure steps before the first
// sweep, on a bench whose unit is exactly known: output offset 3.1 mV, no gain
// error, no noise anywhere.
func measureFiles(t *testing.T, steps string) (*sequencer.Station, *sequencer.Sequence) {
	t.Helper()
	st, err := sequencer.ParseStation("brx200-station.yaml", []byte(demoFile(t, "brx200-station.yaml")))
	if err != nil {
		t.Fatal(err)
	}
	set := ideal(map[string]string{"offset": "3.1 mV", "gain_error": "0 ppm"})
	for role, in := range st.Instruments {
		in.Settings = set[role]
		st.Instruments[role] = in
	}
	anchor := "  - kind: sweep                  # the unit as found"
	text := demoFile(t, "brx200-sequence.yaml")
	if !strings.Contains(text, anchor) {
		t.Fatal("demo sequence has no as-found sweep to insert before")
	}
	text = strings.Replace(text, anchor, steps+anchor, 1)
	seq, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(text), demoReader(t, nil))
	if err != nil {
		t.Fatal(err)
	}
	return st, seq
}

func TestMeasureZeroAndReference(t *testing.T) {
	st, seq := measureFiles(t, measureSteps)
	e := openEngine(t, st, seq)
	rec := e.Run(context.Background(), "BRX-00014")
	if rec.Verdict != sequencer.Pass {
		t.Fatalf("verdict %s, fault %q, reasons %q", rec.Verdict, rec.Fault, rec.Reasons)
	}
	// Hand-worked: with the input shorted (source output off) the card gives its
	// ideal 2.5 V plus its 3.1 mV output offset; at 5 mV, 200 × 5 mV more. The
	// meter resolves 1 µV and nothing is noisy.
	near(t, "zero output", resultOf(t, rec, "zero_output").Value, 2.5031, 1e-6)
	near(t, "zero error", resultOf(t, rec, "zero_error").Value, 3.1e-3, 1e-6)
	near(t, "zero noise", resultOf(t, rec, "zero_noise").Value, 0, 1e-6)
	near(t, "reference output", resultOf(t, rec, "ref_output").Value, 3.5031, 1e-6)
	near(t, "reference error", resultOf(t, rec, "ref_error").Value, 3.1e-3, 1e-6)
	for _, name := range []string{"zero_output", "zero_error", "ref_output", "ref_error"} {
		if r := resultOf(t, rec, name); !(r.Unc.Expanded > 0) {
			t.Errorf("%s: U = %g, want > 0", name, r.Unc.Expanded)
		}
	}
	// The source's spec at the level adds to the reference error only.
	if a, b := resultOf(t, rec, "ref_output").Unc.Std, resultOf(t, rec, "ref_error").Unc.Std; !(b > a) {
		t.Errorf("u(ref_error) = %g, want more than u(ref_output) = %g", b, a)
	}
	// The readings are kept as a one-point sweep named after the step.
	var found int
	for _, sw := range rec.Sweeps {
		if sw.Name == "zero check" || sw.Name == "reference check" {
			found++
			if len(sw.Points) != 1 || len(sw.Points[0].Readings) != 4 || sw.Stage != sequencer.AsFound {
				t.Errorf("%s: %d points, stage %v", sw.Name, len(sw.Points), sw.Stage)
			}
		}
	}
	if found != 2 {
		t.Errorf("%d measure sweeps in the record, want 2", found)
	}
	again, err := sequencer.Replay(sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test"}, rec)
	if err != nil {
		t.Fatal(err)
	}
	if d := sequencer.Differences(rec, again); len(d) > 0 {
		t.Errorf("replay differs: %s", strings.Join(d, "; "))
	}
	pred := sequencer.PredictUncertainty(st, seq)
	for _, name := range []string{"zero_output", "zero_error", "ref_output", "ref_error"} {
		if v, ok := pred[name]; !ok || !(v.U > 0) {
			t.Errorf("predicted %s: %+v (present %v), want U > 0", name, v, ok)
		}
	}
}

func TestMeasureRefusals(t *testing.T) {
	// A level above the station's cap is refused at the caps check, naming the step.
	st, seq := measureFiles(t, strings.Replace(measureSteps, "level: 5 mV", "level: 50 V", 1))
	err := sequencer.CheckCaps(st, seq)
	if !errors.Is(err, sequencer.ErrSafety) || !strings.Contains(err.Error(), `step "reference check"`) {
		t.Errorf("want the level refused naming the step, got %v", err)
	}
	// One reading gives no noise estimate: refused at its key.
	bad := strings.Replace(demoFile(t, "brx200-sequence.yaml"), "  - kind: sweep                  # the unit as found",
		strings.Replace(measureSteps, "readings: 4", "readings: 1", 1)+"  - kind: sweep                  # the unit as found", 1)
	_, err = sequencer.ParseSequence("brx200-sequence.yaml", []byte(bad), demoReader(t, nil))
	if err == nil || !strings.Contains(err.Error(), "expected at least 2 readings") {
		t.Errorf("want one reading refused, got %v", err)
	}
}
