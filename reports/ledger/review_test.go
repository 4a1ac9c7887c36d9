package ledger_test

import (
	"slices"
	"testing"

	"trimline/sequencer"
)

// The review queue holds the REVIEW runs whose certificate is current, oldest
// first, of one station or all: a certified retest, a review decision (a
// retest of the run) or a void takes a unit off it; a retest that faulted, a
// PASS or FAIL run and an engineering REVIEW run are never on it.
func TestReviewQueue(t *testing.T) {
	l, _ := openLedger(t)
	shape := recordShape{sweeps: 1, points: 2, readings: 1}
	rec := func(id, serial, station string, v sequencer.Verdict, retestOf string) *sequencer.Record {
		r := makeRecord(id, serial, v, shape)
		r.Station, r.RetestOf = station, retestOf
		return r
	}
	queue := func(station string) []string {
		t.Helper()
		q, err := l.ReviewQueue(ctx, station)
		if err != nil {
			t.Fatal(err)
		}
		var ids []string
		for _, s := range q {
			ids = append(ids, s.RunID)
		}
		return ids
	}
	if q, err := l.ReviewQueue(ctx, ""); err != nil || q == nil || len(q) != 0 {
		t.Fatalf("an empty ledger's queue: %#v %v, want an empty list", q, err)
	}
	mustRecord(t, l, rec("a1", "SN-1", "EOL-1", sequencer.Review, ""), "EOL")
	mustRecord(t, l, rec("b1", "SN-2", "EOL-2", sequencer.Review, ""), "EOL")
	mustRecord(t, l, rec("c1", "SN-3", "EOL-1", sequencer.Pass, ""), "EOL")
	mustRecord(t, l, rec("d1", "SN-4", "EOL-1", sequencer.Fail, ""), "EOL")
	eng := rec("e1", "SN-5", "EOL-1", sequencer.Review, "")
	eng.Engineering = true
	mustRecord(t, l, eng, "EOL-ENG")
	v1 := mustRecord(t, l, rec("v1", "SN-6", "EOL-1", sequencer.Review, ""), "EOL")
	mustRecord(t, l, rec("g1", "SN-7", "EOL-1", sequencer.Review, ""), "EOL")
	// A faulted retest of a1 decides nothing; b1's certified retest and v1's
	// void take them off.
	mustRecord(t, l, rec("a2", "SN-1", "EOL-1", sequencer.Fault, "a1"), "EOL")
	mustRecord(t, l, rec("b2", "SN-2", "EOL-2", sequencer.Pass, "b1"), "EOL")
	if err := l.VoidCertificate(ctx, v1, "Quality", "wrong limit file"); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		station string
		want    []string
	}{{"", []string{"a1", "g1"}}, {"EOL-1", []string{"a1", "g1"}}, {"EOL-2", nil}, {"EOL-9", nil}} {
		if got := queue(c.station); !slices.Equal(got, c.want) {
			t.Errorf("queue of %q: %q, want %q", c.station, got, c.want)
		}
	}
	// A review decision on a1 is a certified retest of it: a1 leaves the queue.
	d := rec("a3", "SN-1", "EOL-1", sequencer.Pass, "a1")
	d.Disposition = &sequencer.Disposition{Of: "a1", Decision: sequencer.DecisionAccept, Reviewer: "R", Reason: "ok"}
	mustRecord(t, l, d, "EOL")
	if got := queue("EOL-1"); !slices.Equal(got, []string{"g1"}) {
		t.Errorf("after a decision on a1: %q, want [g1]", got)
	}
}
