package ledger_test

import (
	"testing"
	"time"

	"trimline/reports/ledger"
	"trimline/sequencer"
)

// Measured attempts: PASS, FAIL and REVIEW runs of the serial count; FAULT and
// ABORTED runs, other serials, a reviewer's disposition of a REVIEW run, and
// engineering runs (counted apart) do not.
func TestMeasuredAttempts(t *testing.T) {
	l, _ := openLedger(t)
	shape := recordShape{sweeps: 1, points: 2, readings: 1}
	count := func(eng bool) int {
		t.Helper()
		n, err := l.MeasuredAttempts(ctx, "SN-7", eng)
		if err != nil {
			t.Fatal(err)
		}
		return n
	}
	if n := count(false); n != 0 {
		t.Fatalf("no runs: %d attempts", n)
	}
	steps := []struct {
		id      string
		serial  string
		verdict sequencer.Verdict
		eng     bool
		dispose bool
		want    int
	}{
		{"a1", "SN-7", sequencer.Fault, false, false, 0},
		{"a2", "SN-7", sequencer.Fail, false, false, 1},
		{"a3", "SN-7", sequencer.Aborted, false, false, 1},
		{"a4", "SN-8", sequencer.Pass, false, false, 1},
		{"a5", "SN-7", sequencer.Review, false, false, 2},
		{"a6", "SN-7", sequencer.Pass, false, true, 2}, // the reviewer's acceptance of a5
		{"a7", "SN-7", sequencer.Pass, true, false, 2},
	}
	prev, prevCert := "", ""
	for _, s := range steps {
		rec := makeRecord(s.id, s.serial, s.verdict, shape)
		rec.Engineering = s.eng
		prefix := "EOL"
		if s.eng {
			prefix = "EOL-ENG"
		}
		var cert string
		if s.dispose {
			// A decision is stored with its audit trail entry.
			rec.RetestOf = prev
			rec.Disposition = &sequencer.Disposition{Of: prev, OfCertificate: prevCert, Decision: sequencer.DecisionAccept, Reviewer: "Tobias Wrenhollow",
				Reason: "within the customer's wider spec", At: time.Date(2025, 6, 4, 8, 0, 0, 0, time.UTC)}
			var err error
			if cert, err = l.RecordRunWith(ctx, rec, ledger.RecordOptions{Prefix: prefix, Review: &ledger.ReviewDetail{Reason: rec.Disposition.Reason}}); err != nil {
				t.Fatal(err)
			}
		} else {
			cert = mustRecord(t, l, rec, prefix)
		}
		if s.serial == "SN-7" && !s.eng {
			prev, prevCert = s.id, cert
		}
		if n := count(false); n != s.want {
			t.Fatalf("after %s (%s %s): %d attempts, want %d", s.id, s.serial, s.verdict, n, s.want)
		}
	}
	if n := count(true); n != 1 {
		t.Errorf("engineering attempts %d, want 1", n)
	}
}
