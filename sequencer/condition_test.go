package sequencer

import (
	"strings"
	"testing"

	"trimline/instruments/units"
)

// A condition reads the results it names, not every result whose name its text
// contains: over pre_offset_x it does not read pre_offset, so an invalid
// pre_offset cannot keep it from skipping.
func TestConditionReadsItsIdentifiersOnly(t *testing.T) {
	scope := []ResultDef{{Name: "pre_offset", Dim: units.Volt}, {Name: "pre_offset_x", Dim: units.Volt}, {Name: "gain", Dim: units.Ratio}}
	for _, c := range []struct{ text, uses string }{
		{"pre_offset_x < 1", "pre_offset_x"},
		{"abs(gain) > 1 && pre_offset < 1", "gain pre_offset"},
		{"pre_offset + pre_offset > 0", "pre_offset"},
	} {
		cond, err := compileCondition(c.text, scope)
		if err != nil {
			t.Fatal(err)
		}
		if got := strings.Join(cond.uses, " "); got != c.uses {
			t.Errorf("%q reads %q, want %q", c.text, got, c.uses)
		}
	}
	if _, err := compileCondition("post_offset > 0", scope); err == nil || !strings.Contains(err.Error(), "results of earlier steps: pre_offset, pre_offset_x, gain") {
		t.Errorf("unknown name: %v", err)
	}
}
