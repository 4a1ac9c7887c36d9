package sequencer_test

import (
	"strings"
	"testing"

	"trimline/instruments/files"
	"trimline/sequencer"
)

// Steps each within their own bounds cannot add up to a run that never ends: the
// count of steps, the run's estimated time and its readings are bounded too,
// reported at the steps list. Before, 1400 sweeps of 1000 points loaded (about
// 1400 h and 140 million readings).
func TestRunBounds(t *testing.T) {
	demo := demoFile(t, "brx200-sequence.yaml")
	for _, c := range []struct {
		name, add, want string
	}{
		{"steps", strings.Repeat("  - {kind: sweep, from: -10 mV, to: 10 mV, points: 3, settle: 1 ms, readings: 1}\n", 201),
			"expected at most 200 steps, found 210"},
		// 30 sweeps of 100 × 30 s = 25 h.
		{"time", strings.Repeat("  - {kind: sweep, from: -10 mV, to: 10 mV, points: 100, settle: 30 s, readings: 1}\n", 30),
			"expected a run of at most 24h0m0s"},
		// Soaks count at their timeouts: 4 × 8 h = 32 h.
		{"soaks", strings.Repeat("  - {kind: soak, thermal: chamber, set_point: 85 °C, band: 0.5 °C, dwell: 5 min, timeout: 8 h}\n", 4),
			"expected a run of at most 24h0m0s"},
		{"readings", strings.Repeat("  - {kind: sweep, from: -10 mV, to: 10 mV, points: 1000, settle: 0 s, readings: 100}\n", 5),
			"expected at most 400000 meter readings in a run"},
	} {
		_, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(demo+"\n"+c.add), demoReader(t, nil))
		fe := files.Errs(err)
		if len(fe) == 0 || !strings.Contains(err.Error(), c.want) || !strings.HasPrefix(fe[0].Error(), "brx200-sequence.yaml:") {
			t.Errorf("%s: %v, want a positioned %q", c.name, err, c.want)
		}
	}
}

// An order-2 fit through as few distinct levels as it has coefficients would fit
// them exactly and pass any nonlinearity limit: refused at load.
func TestFitNeedsLevelsToSpare(t *testing.T) {
	src := strings.NewReplacer(
		"    points: 11\n    settle: 20 ms                # wait after every source step\n", "    points: 3\n    settle: 20 ms\n",
		"    sweep: pre-trim\n", "    sweep: pre-trim\n    order: 2\n").Replace(demoFile(t, "brx200-sequence.yaml"))
	_, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(src), demoReader(t, nil))
	if err == nil || !strings.Contains(err.Error(), "the sweep has 3 distinct levels: an order-2 fit needs at least 4") {
		t.Errorf("order 2 on 3 levels: %v", err)
	}
}

// The TUR prediction runs every step, skip_if or not: on paper every result is
// ideal, and a "skip when already good" would leave its limits without a TUR.
func TestPredictionRunsSkippableSteps(t *testing.T) {
	src := strings.Replace(demoFile(t, "brx200-sequence.yaml"), "  - kind: fit\n    name: verify fit\n",
		"  - kind: fit\n    name: extra fit\n    sweep: verify\n    skip_if: abs(pre_offset) < 1\n    results: {offset: extra_offset}\n\n  - kind: fit\n    name: verify fit\n", 1)
	seq, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(src), demoReader(t, nil))
	if err != nil {
		t.Fatal(err)
	}
	st, _ := demoFiles(t, nil)
	if v, ok := sequencer.PredictUncertainty(st, seq)["extra_offset"]; !ok || !(v.U > 0) {
		t.Errorf("extra_offset predicted %+v (%v), want a U", v, ok)
	}
}

// A whole step written on one line reports each of its problems: a decoding
// problem hides only the loader's complaint at its own place, not another on the
// same line.
func TestOneLineStepReportsEveryProblem(t *testing.T) {
	src := strings.Replace(demoFile(t, "brx200-sequence.yaml"), "  - kind: store                  # commits both codes to non-volatile memory\n    command: \"NV STORE\"\n",
		"  - {kind: store, comand: \"NV STORE\", port: Bad-Port}\n", 1)
	_, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(src), demoReader(t, nil))
	for _, want := range []string{`unknown field "comand"`, `missing required key "command"`, `role "Bad-Port": expected a name of lowercase letters`} {
		if err == nil || !strings.Contains(err.Error(), want) {
			t.Errorf("missing %q in:\n%v", want, err)
		}
	}
	steps := strings.Replace(demoFile(t, "brx200-sequence.yaml"), "\nsteps:\n", "\nsteps: 3\nunused:\n", 1)
	if _, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(steps), demoReader(t, nil)); err == nil || !strings.Contains(err.Error(), "expected a list of steps") {
		t.Errorf("steps: 3 gives %v", err)
	}
}

// An anchor is refused at its place, instead of the whole file falling back to a
// decoder that stops at its first problem (and reports keys that are there as
// missing).
func TestAnchorRefused(t *testing.T) {
	src := strings.Replace(demoFile(t, "brx200-sequence.yaml"), "    bits: 12\n    lsb: 10 ppm\n", "    bits: &b 12\n    lsb: 10 ppm\n", 1)
	_, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(src), demoReader(t, nil))
	fe := files.Errs(err)
	if len(fe) != 1 || !strings.Contains(fe[0].Msg, "anchors, aliases, merge keys and tags are not allowed") || fe[0].Line != lineOf(t, src, "&b 12") {
		t.Errorf("got %v", err)
	}
}
