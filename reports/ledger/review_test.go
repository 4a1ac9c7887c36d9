package ledger_test

import (
	"errors"
	"slices"
	"strings"
	"testing"
	"time"

	"trimline/reports/ledger"
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
	d.Disposition = &sequencer.Disposition{Of: "a1", OfCertificate: "EOL-000001", Decision: sequencer.DecisionAccept, Reviewer: "R", Reason: "ok"}
	if _, err := l.RecordRun(ctx, d, "EOL"); !errors.Is(err, ledger.ErrInvalid) {
		t.Errorf("a decision without its audit entry: %v, want ErrInvalid", err)
	}
	if _, err := l.RecordRunWith(ctx, d, ledger.RecordOptions{Prefix: "EOL", Review: &ledger.ReviewDetail{Reason: "ok"}}); err != nil {
		t.Fatal(err)
	}
	if got := queue("EOL-1"); !slices.Equal(got, []string{"g1"}) {
		t.Errorf("after a decision on a1: %q, want [g1]", got)
	}
}

// A review decision's audit entry is written with its record, in one
// transaction that also supersedes the REVIEW certificate: a second decision
// on the same unit, a decision on a run not held for REVIEW, one whose verdict
// is not the decision's, or one that names another certificate is refused and
// stores nothing.
func TestReviewDecisionStoredWithItsRecord(t *testing.T) {
	l, _ := openLedger(t)
	shape := recordShape{sweeps: 1, points: 2, readings: 1}
	held := makeRecord("r1", "SN-1", sequencer.Review, shape)
	c1 := mustRecord(t, l, held, "EOL")
	passed := makeRecord("p1", "SN-2", sequencer.Pass, shape)
	c2 := mustRecord(t, l, passed, "EOL")
	decision := func(id, of, ofCert string, v sequencer.Verdict, decision string) *sequencer.Record {
		r := makeRecord(id, held.Serial, v, shape)
		if of == passed.RunID {
			r.Serial = passed.Serial
		}
		r.RetestOf = of
		r.Disposition = &sequencer.Disposition{Of: of, OfCertificate: ofCert, Decision: decision, Reviewer: "Ada Quillfeather", Reason: "rechecked"}
		return r
	}
	store := func(rec *sequencer.Record) (string, error) {
		return l.RecordRunWith(ctx, rec, ledger.RecordOptions{Prefix: "EOL", Review: &ledger.ReviewDetail{Reason: "rechecked", Authenticated: "station sign-in"}})
	}
	for _, c := range []struct {
		name string
		rec  *sequencer.Record
		want error
	}{
		{"verdict not the decision's", decision("d0", "r1", c1, sequencer.Fail, sequencer.DecisionAccept), ledger.ErrInvalid},
		{"another certificate named", decision("d0", "r1", c2, sequencer.Pass, sequencer.DecisionAccept), ledger.ErrInvalid},
		{"no decision", decision("d0", "r1", c1, sequencer.Pass, "ship"), ledger.ErrInvalid},
		{"a PASS run decided on", decision("d0", "p1", c2, sequencer.Pass, sequencer.DecisionAccept), ledger.ErrInvalid},
	} {
		if _, err := store(c.rec); !errors.Is(err, c.want) {
			t.Errorf("%s: %v, want %v", c.name, err, c.want)
		}
	}
	before, _ := l.Counts(ctx)
	if before["runs"] != 2 {
		t.Fatalf("refused decisions stored runs: %v", before)
	}
	c3, err := store(decision("d1", "r1", c1, sequencer.Pass, sequencer.DecisionAccept))
	if err != nil {
		t.Fatal(err)
	}
	e, ok, err := l.ReviewDecision(ctx, c1)
	if err != nil || !ok || e.Reviewer != "Ada Quillfeather" || e.Decision != sequencer.DecisionAccept || e.Certificate != c3 ||
		e.RunID != "d1" || e.OfRunID != "r1" || e.Authenticated != "station sign-in" {
		t.Fatalf("the decision's entry: %+v %v %v", e, ok, err)
	}
	if st, _ := l.CertificateStatus(ctx, c1); st.SupersededBy != c3 {
		t.Errorf("the REVIEW certificate: %+v", st)
	}
	after, _ := l.Counts(ctx)
	if _, err := store(decision("d2", "r1", c1, sequencer.Fail, sequencer.DecisionReject)); !errors.Is(err, ledger.ErrDecided) {
		t.Errorf("a second decision: %v, want ErrDecided", err)
	}
	if again, _ := l.Counts(ctx); again["runs"] != after["runs"] || again["audit_trail"] != after["audit_trail"] {
		t.Errorf("the refused second decision stored something: %v, then %v", after, again)
	}
}

// Only the ledger writes review decision entries, and audit ledger checks
// each: a forged one, naming a decision the ledger never stored, breaks the
// chain check.
func TestReviewEntriesAreChecked(t *testing.T) {
	l, path := openLedger(t)
	shape := recordShape{sweeps: 1, points: 2, readings: 1}
	held := makeRecord("r1", "SN-1", sequencer.Review, shape)
	c1 := mustRecord(t, l, held, "EOL")
	other := makeRecord("r2", "SN-2", sequencer.Review, shape)
	c2 := mustRecord(t, l, other, "EOL")
	d := makeRecord("d1", "SN-1", sequencer.Pass, shape)
	d.RetestOf = "r1"
	d.Disposition = &sequencer.Disposition{Of: "r1", OfCertificate: c1, Decision: sequencer.DecisionAccept, Reviewer: "Ada Quillfeather", Reason: "rechecked"}
	c3, err := l.RecordRunWith(ctx, d, ledger.RecordOptions{Prefix: "EOL", Review: &ledger.ReviewDetail{Reason: "rechecked"}})
	if err != nil {
		t.Fatal(err)
	}
	if rep, err := l.VerifyChain(ctx, "", ledger.ChainOptions{}); err != nil || !rep.OK {
		t.Fatalf("an honest decision: %+v %v", rep, err)
	}
	if err := l.Audit(ctx, "Mallory", ledger.ActionReviewAccept, c2, `{}`); !errors.Is(err, ledger.ErrInvalid) {
		t.Errorf("Audit(review accept) = %v, want ErrInvalid", err)
	}
	// Appended behind the ledger's back, with a hash that chains: a decision on
	// c2 "by" c3, which superseded c1, not c2.
	trail, err := l.AuditTrail(ctx)
	if err != nil {
		t.Fatal(err)
	}
	last := trail[len(trail)-1]
	seq, at := last.Seq+1, time.Now().UTC().Format("2006-01-02T15:04:05.000000000Z")
	detail := `{"certificate":"` + c3 + `","run_id":"d1","of_run_id":"r2","reason":"forged"}`
	db := rawDB(t, path)
	if _, err := db.Exec(`INSERT INTO audit_trail (seq, at, actor, action, subject, detail, prev_hash, hash) VALUES (?, ?, ?, ?, ?, ?, ?, ?)`,
		seq, at, "Mallory", ledger.ActionReviewAccept, c2, detail, last.Hash,
		ledger.AuditHash(last.Hash, seq, at, "Mallory", ledger.ActionReviewAccept, c2, detail)); err != nil {
		t.Fatal(err)
	}
	rep, err := l.VerifyChain(ctx, "", ledger.ChainOptions{})
	if err != nil || rep.OK || !strings.Contains(rep.Reason, "is not a certified retest of run r2") {
		t.Errorf("a forged decision: %+v %v", rep, err)
	}
}
