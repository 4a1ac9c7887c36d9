package ledger_test

import (
	"encoding/json"
	"errors"
	"testing"

	"trimline/reports/ledger"
	"trimline/sequencer"
)

// A certified retest supersedes the certificate of the run it repeats, in the
// transaction that records it: the serial holds one current certificate, the
// link is in the record, the row and the create entry, and the chain verifies.
// A retest that faults supersedes nothing; FAULT and ABORTED runs never count as
// a test, and engineering runs count only among engineering runs.
func TestRetestSupersedes(t *testing.T) {
	l, _ := openLedger(t)
	shape := recordShape{sweeps: 1, points: 2, readings: 1}
	rec := func(id string, v sequencer.Verdict, retestOf string) *sequencer.Record {
		r := makeRecord(id, "SN-9", v, shape)
		r.RetestOf = retestOf
		return r
	}
	last := func(eng bool) string {
		t.Helper()
		r, ok, err := l.LastMeasuredRun(ctx, "SN-9", eng)
		if err != nil {
			t.Fatal(err)
		}
		if !ok {
			return ""
		}
		return r.RunID
	}
	mustRecord(t, l, rec("f0", sequencer.Fault, ""), "EOL")
	if got := last(false); got != "" {
		t.Fatalf("a FAULT run counts as a test: %q", got)
	}
	c1 := mustRecord(t, l, rec("r1", sequencer.Fail, ""), "EOL")
	if got := last(false); got != "r1" {
		t.Fatalf("LastMeasuredRun = %q, want r1", got)
	}
	if got := last(true); got != "" {
		t.Fatalf("a production run counts among engineering runs: %q", got)
	}
	// A retest that faults links but supersedes nothing: r1's certificate stays current.
	mustRecord(t, l, rec("f2", sequencer.Fault, "r1"), "EOL")
	if st, err := l.CertificateStatus(ctx, c1); err != nil || !st.Current() {
		t.Fatalf("after a faulted retest: %+v %v", st, err)
	}
	c3 := mustRecord(t, l, rec("r3", sequencer.Pass, "r1"), "EOL")
	st, err := l.CertificateStatus(ctx, c1)
	if err != nil || !st.Superseded || st.SupersededBy != c3 || st.SupersededByRun != "r3" || st.Current() {
		t.Fatalf("status of %s after the retest: %+v %v", c1, st, err)
	}
	if st, err := l.CertificateStatus(ctx, c3); err != nil || !st.Current() {
		t.Fatalf("status of the retest's %s: %+v %v", c3, st, err)
	}
	if got := last(false); got != "r3" {
		t.Errorf("LastMeasuredRun after the retest = %q, want r3", got)
	}
	if got, err := l.Run(ctx, "r3"); err != nil || got.RetestOf != "r1" {
		t.Errorf("stored retest: %+v %v", got, err)
	}
	// Engineering runs of the same serial are tested among themselves.
	eng := rec("e1", sequencer.Pass, "")
	eng.Engineering = true
	mustRecord(t, l, eng, "EOL-ENG")
	if got, gotEng := last(false), last(true); got != "r3" || gotEng != "e1" {
		t.Errorf("LastMeasuredRun production %q, engineering %q; want r3, e1", got, gotEng)
	}
	rep, err := l.VerifyChain(ctx, "")
	if err != nil || !rep.OK {
		t.Fatalf("chain: %+v %v", rep, err)
	}
	var supersedes int
	trail, _ := l.AuditTrail(ctx)
	for _, e := range trail {
		if e.Action == ledger.ActionSupersede {
			supersedes++
			var d map[string]string
			if err := json.Unmarshal([]byte(e.Detail), &d); err != nil || e.Subject != c1 || d["by_certificate"] != c3 {
				t.Errorf("supersede entry %+v", e)
			}
		}
	}
	if supersedes != 1 {
		t.Errorf("%d supersede entries, want 1", supersedes)
	}
	// Only the ledger writes supersede entries; a link must name a run of the serial.
	if err := l.Audit(ctx, "someone", ledger.ActionSupersede, c3, "{}"); !errors.Is(err, ledger.ErrInvalid) {
		t.Errorf("Audit(supersede) = %v, want ErrInvalid", err)
	}
	for _, bad := range []*sequencer.Record{rec("x1", sequencer.Pass, "no-such-run"), func() *sequencer.Record {
		r := makeRecord("x2", "SN-OTHER", sequencer.Pass, shape)
		r.RetestOf = "r3"
		return r
	}()} {
		if _, err := l.RecordRun(ctx, bad, "EOL"); !errors.Is(err, ledger.ErrInvalid) {
			t.Errorf("retest of %s for %s: %v, want ErrInvalid", bad.RetestOf, bad.Serial, err)
		}
	}
}

// A ledger written before retests existed upgrades and keeps verifying; a retest
// of one of its runs supersedes the old certificate like any other.
func TestRetestOfARunFromBeforeTheMigration(t *testing.T) {
	path, pass, _ := oldLedger(t)
	l, err := ledger.Open(ctx, path)
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	if rep, err := l.VerifyChain(ctx, ""); err != nil || !rep.OK {
		t.Fatalf("old ledger after the upgrade: %+v %v", rep, err)
	}
	if got, err := l.Run(ctx, pass.RunID); err != nil || got.RetestOf != "" {
		t.Fatalf("old run: %+v %v", got, err)
	}
	again := makeRecord("new-pass", pass.Serial, sequencer.Pass, recordShape{sweeps: 1, points: 2, readings: 2})
	again.RetestOf = pass.RunID
	cert := mustRecord(t, l, again, "OLD")
	if st, err := l.CertificateStatus(ctx, "OLD-000001"); err != nil || st.SupersededBy != cert {
		t.Errorf("OLD-000001 after its retest: %+v %v", st, err)
	}
	if rep, err := l.VerifyChain(ctx, ""); err != nil || !rep.OK {
		t.Fatalf("after the retest: %+v %v", rep, err)
	}
}
