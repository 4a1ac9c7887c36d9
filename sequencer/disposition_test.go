package sequencer_test

import (
	"context"
	"strings"
	"testing"
	"time"

	"trimline/sequencer"
)

// reviewLimits is the demo limit file with the upper tolerance of "offset after
// trim" at 20 µV: a good unit's trimmed offset (a few µV, U ≈ 0.1 mV) then lies
// inside the tolerance but within w of it, a conditional pass, which the demo's
// policy (conditional_pass: review) holds for REVIEW.
func reviewLimits(t testing.TB) map[string]string {
	t.Helper()
	text := demoFile(t, "brx200-limits.yaml")
	const tol = "uses: [post_offset]\n    tolerance: {lower: -800, upper: 800}"
	if !strings.Contains(text, tol) {
		t.Fatal("the demo limit file no longer has the offset-after-trim tolerance this test narrows")
	}
	return map[string]string{"brx200-limits.yaml": strings.Replace(text, tol, "uses: [post_offset]\n    tolerance: {lower: -800, upper: 20}", 1)}
}

// A record that carries a review decision replays to REVIEW and then takes
// the decision's verdict: reproduced exactly for an honest one; a decision on a
// run that recomputes to anything but REVIEW, or a word that is no decision,
// is a difference.
func TestReplayOfReviewDecision(t *testing.T) {
	st, seq := demoFiles(t, reviewLimits(t))
	cfg := sequencer.Config{Station: st, Sequence: seq}
	held := openEngine(t, st, seq).Run(context.Background(), "BRX-00001")
	if held.Verdict != sequencer.Review {
		t.Fatalf("BRX-00001 against the narrowed limit: %s, want REVIEW (%q)", held.Verdict, held.Reasons)
	}
	decided := func(decision string, v sequencer.Verdict) *sequencer.Record {
		c := *held
		c.RunID, c.Verdict, c.RetestOf = held.RunID+"-d", v, held.RunID
		c.Disposition = &sequencer.Disposition{Of: held.RunID, OfCertificate: "TL1-000001", Decision: decision,
			Reviewer: "Ada Quillfeather", Reason: "offset checked on the bench meter", At: time.Now().UTC(), Tested: held.Finished}
		return &c
	}
	for _, c := range []struct {
		name string
		rec  *sequencer.Record
		want []string // each difference must contain the matching word
	}{
		{"accepted", decided(sequencer.DecisionAccept, sequencer.Pass), nil},
		{"rejected", decided(sequencer.DecisionReject, sequencer.Fail), nil},
		{"accept recorded as FAIL", decided(sequencer.DecisionAccept, sequencer.Fail), []string{"verdict: recorded FAIL, recomputed PASS"}},
		{"no decision", decided("maybe", sequencer.Pass), []string{"verdict: recorded PASS, recomputed REVIEW", `review decision "maybe": neither accept nor reject`}},
	} {
		again, err := sequencer.Replay(cfg, c.rec)
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		d := sequencer.Differences(c.rec, again)
		if len(d) != len(c.want) {
			t.Errorf("%s: differences %q, want %d", c.name, d, len(c.want))
			continue
		}
		for i, w := range c.want {
			if !strings.Contains(d[i], w) {
				t.Errorf("%s: difference %q, want it to say %q", c.name, d[i], w)
			}
		}
	}

	// The same decision on a run that recomputes to PASS with the demo's own
	// limits: the decision does not apply, whatever the verdict says.
	st, seq = demoFiles(t, nil)
	again, err := sequencer.Replay(sequencer.Config{Station: st, Sequence: seq}, decided(sequencer.DecisionAccept, sequencer.Pass))
	if err != nil {
		t.Fatal(err)
	}
	d := sequencer.Differences(decided(sequencer.DecisionAccept, sequencer.Pass), again)
	if len(d) == 0 || !strings.Contains(strings.Join(d, "\n"), "review decision accept of TL1-000001: the run recomputes to PASS, not REVIEW") {
		t.Errorf("a decision on a run that recomputes to PASS: differences %q", d)
	}
}
