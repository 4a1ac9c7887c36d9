package sequencer_test

import (
	"context"
	"errors"
	"strings"
	"testing"

	"trimline/sequencer"
)

// A sweep point that cannot finish within the station's step deadline is refused
// when the files meet (check, and Open), naming the step, instead of faulting
// every unit at its first point. Hand-worked: the demo's point is 20 ms settle +
// 8 readings × 1 PLC at 50 Hz = 180 ms; with nplc 10 it is 1.62 s.
func TestStepLongerThanTheDeadlineIsRefused(t *testing.T) {
	st, err := sequencer.ParseStation("brx200-station.yaml", []byte(strings.Replace(demoFile(t, "brx200-station.yaml"),
		"safety:\n", "step_deadline: 1 s\nsafety:\n", 1)))
	if err != nil {
		t.Fatal(err)
	}
	_, seq := demoFiles(t, nil)
	if err := sequencer.CheckTiming(st, seq); err != nil {
		t.Fatalf("180 ms points under a 1 s deadline: %v", err)
	}
	slow, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(strings.Replace(demoFile(t, "brx200-sequence.yaml"),
		"    name: verify\n", "    name: verify\n    nplc: 10\n", 1)), demoReader(t, nil))
	if err != nil {
		t.Fatal(err)
	}
	err = sequencer.CheckTiming(st, slow)
	if !errors.Is(err, sequencer.ErrStepTiming) || !strings.Contains(err.Error(), `step "verify" needs at least 1.62s`) || strings.Contains(err.Error(), `"pre-trim"`) {
		t.Fatalf("CheckTiming = %v", err)
	}
	if _, err := sequencer.Open(context.Background(), sequencer.Config{Station: st, Sequence: slow}); !errors.Is(err, sequencer.ErrStepTiming) {
		t.Errorf("Open = %v, want ErrStepTiming", err)
	}
}
