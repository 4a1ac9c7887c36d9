package sequencer_test

import (
	"strings"
	"testing"

	"trimline/sequencer"
)

// offset_change and gain_change are changes from another fit: without
// baseline, or with a baseline that is not an earlier fit step, the file is
// refused at load with the key's position.
func TestTrimEffectNeedsBaseline(t *testing.T) {
	demo := demoFile(t, "brx200-sequence.yaml")
	for _, c := range []struct{ name, old, new, want string }{
		{"no baseline", "    baseline: pre-trim fit", "", "offset_change is the change from an earlier fit: name it with baseline: <fit step>"},
		{"not a fit", "    baseline: pre-trim fit", "    baseline: verify", `step "verify" is a sweep step: expected a fit step`},
	} {
		src := strings.Replace(demo, c.old, c.new, 1)
		if src == demo {
			t.Fatalf("%s: the demo sequence has no %q", c.name, c.old)
		}
		_, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(src), demoReader(t, nil))
		if err == nil || !strings.Contains(err.Error(), c.want) || !strings.HasPrefix(err.Error(), "brx200-sequence.yaml:") {
			t.Errorf("%s: %v, want a positioned %q", c.name, err, c.want)
		}
	}
}

// trimEffectLines are the demo's lines that ask the verify fit for the trim's
// effect: results added to the demo after the first layout, which has none.
var trimEffectLines = []string{
	"    baseline: pre-trim fit         # the trim's effect is the change from this fit\n",
	"      offset_change: trim_offset_change  # shared instrument errors cancel: u ≈ 3 µV\n",
	"      gain_change: trim_gain_change\n",
}

// demoAsFirstLayout is the demo sequence without the steps and results added since the
// first layout (its zero check, the trim's effect): the step list that flow was written as.
func demoAsFirstLayout(t testing.TB) string {
	t.Helper()
	s := withoutZero(t)
	for _, l := range trimEffectLines {
		if !strings.Contains(s, l) {
			t.Fatalf("the demo sequence has no line %q", l)
		}
		s = strings.Replace(s, l, "", 1)
	}
	return s
}
