package sequencer_test

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"trimline/sequencer"
)

// README's "Bounds on a sequence" states the bounds the loader enforces.
func TestReadmeBoundsMatchTheLoader(t *testing.T) {
	data, err := os.ReadFile(filepath.Join("..", "README.md"))
	if err != nil {
		t.Fatal(err)
	}
	text := string(data)
	i := strings.Index(text, "### Bounds on a sequence")
	if i < 0 {
		t.Fatal("README.md has no section Bounds on a sequence")
	}
	sec := text[i:]
	if j := strings.Index(sec[4:], "\n### "); j >= 0 {
		sec = sec[:j+4]
	}
	thousands := func(n int) string { // 400000 → "400 000"
		s := fmt.Sprint(n)
		for k := len(s) - 3; k > 0; k -= 3 {
			s = s[:k] + " " + s[k:]
		}
		return s
	}
	for _, want := range []string{
		fmt.Sprintf("at most %d |", sequencer.MaxSteps),
		fmt.Sprintf("at most %g h |", sequencer.MaxRunTime.Hours()),
		fmt.Sprintf("at most %s |", thousands(sequencer.MaxRunReadings)),
		fmt.Sprintf("at most %s |", thousands(sequencer.MaxSweepReadings)),
		fmt.Sprintf("at most %g h |", sequencer.MaxSweepTime.Hours()),
		fmt.Sprintf("%d … %d |", sequencer.MinPoints, sequencer.MaxPoints),
		fmt.Sprintf("1 … %d; at most %g min; at most %d |", sequencer.MaxReadings, sequencer.MaxSettle.Minutes(), sequencer.MaxNPLC),
		"step_deadline", "anchors, aliases",
	} {
		if !strings.Contains(sec, want) {
			t.Errorf("README.md's Bounds on a sequence lacks %q", want)
		}
	}
}
