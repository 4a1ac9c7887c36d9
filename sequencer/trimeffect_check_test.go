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
