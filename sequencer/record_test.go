package sequencer_test

import (
	"testing"

	"trimline/limits"
	"trimline/sequencer"
)

func TestVerdictJudged(t *testing.T) {
	for v, want := range map[sequencer.Verdict]string{
		sequencer.Pass: limits.VerdictPass, sequencer.Review: limits.VerdictReview, sequencer.Fail: limits.VerdictFail,
		sequencer.Fault: "", sequencer.Aborted: "",
	} {
		if got, ok := v.Judged(); got != want || ok != (want != "") {
			t.Errorf("%s.Judged() = %q, %v; want %q", v, got, ok, want)
		}
	}
}
