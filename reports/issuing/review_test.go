package issuing_test

import (
	"context"
	"encoding/base64"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"trimline/limits"
	"trimline/reports/audit"
	"trimline/reports/issuing"
	"trimline/reports/ledger"
	"trimline/reports/signing"
	"trimline/reports/whatif"
	"trimline/sequencer"
)

// narrowOffset writes the demo limit file in dir with the upper tolerance of
// "offset after trim" at 20 µV: a good unit's trimmed offset (a few µV, U ≈
// 0.1 mV) lies inside it but within w of it, a conditional pass, which the
// demo's policy (conditional_pass: review) holds for REVIEW.
func narrowOffset(t *testing.T, dir string) {
	t.Helper()
	path := filepath.Join(dir, "brx200-limits.yaml")
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	const tol = "uses: [post_offset]\n    tolerance: {lower: -800, upper: 800}"
	if !strings.Contains(string(data), tol) {
		t.Fatal("the demo limit file no longer has the offset-after-trim tolerance this test narrows")
	}
	data = []byte(strings.Replace(string(data), tol, "uses: [post_offset]\n    tolerance: {lower: -800, upper: 20}", 1))
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
}

// heldUnits runs the demo's first units against the narrowed limit in a fresh
// folder, issuing their REVIEW certificates with the station's key, and gives
// the station two people: a reviewer with a key and an operator. It returns the
// issuer, the reviewer's key and the certificates, in serial order.
func heldUnits(t *testing.T, serials ...string) (is *issuing.Issuer, reviewerKey *signing.Key, certs []string) {
	t.Helper()
	ctx := context.Background()
	dir := t.TempDir()
	st, _ := demoFiles(t, dir)
	narrowOffset(t, dir)
	seq, err := sequencer.LoadSequence(filepath.Join(dir, "brx200-sequence.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	priv, pub, err := signing.Init(filepath.Join(dir, "people"), "ada")
	if err != nil {
		t.Fatal(err)
	}
	if reviewerKey, err = signing.Load(priv); err != nil {
		t.Fatal(err)
	}
	st.People = []sequencer.Person{
		{Name: "Otto Benchley", Badge: "B-2001", May: []string{sequencer.RightOperate}},
		{Name: "Ada Quillfeather", Badge: "B-1042", May: []string{sequencer.RightOperate, sequencer.RightReview}, Key: pub},
	}
	led, err := ledger.Open(ctx, filepath.Join(dir, "ledger.db"))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { led.Close() })
	key, err := signing.Load(filepath.Join(dir, "keys", "TL1.key"))
	if err != nil {
		t.Fatal(err)
	}
	is = &issuing.Issuer{Ledger: led, Key: key, Station: st, Sequence: seq, CertDir: dir}
	eng, err := sequencer.Open(ctx, sequencer.Config{Station: st, Sequence: seq, Operator: "Otto Benchley", Software: "test"})
	if err != nil {
		t.Fatal(err)
	}
	defer eng.Close()
	for _, sn := range serials {
		rec := eng.Run(ctx, sn)
		if rec.Verdict != sequencer.Review {
			t.Fatalf("%s against the narrowed limit: %s, want REVIEW (%q)", sn, rec.Verdict, rec.Reasons)
		}
		cert, err := is.Record(ctx, rec)
		if err != nil {
			t.Fatal(err)
		}
		certs = append(certs, cert)
	}
	return is, reviewerKey, certs
}

// Dispose refuses what is not a decision, a person without the review right,
// a key that is not the reviewer's and a certificate that is not a current
// REVIEW one of the station; it records an accepted unit as a signed PASS
// retest of the REVIEW run that supersedes its certificate, with the
// reviewer's signature in the audit trail, and a rejected one as FAIL; the
// decision replays exactly and leaves the review queue.
func TestDispose(t *testing.T) {
	ctx := context.Background()
	is, adaKey, certs := heldUnits(t, "BRX-00001", "BRX-00002")
	led := is.Ledger
	accept := sequencer.Disposition{Decision: sequencer.DecisionAccept, Reviewer: "B-1042", Reason: "offset rechecked on the bench meter: 4 µV"}
	with := func(f func(*sequencer.Disposition)) sequencer.Disposition { d := accept; f(&d); return d }
	for _, c := range []struct {
		name string
		cert string
		d    sequencer.Disposition
		key  *signing.Key
		want error
		says string
	}{
		{"no decision", certs[0], with(func(d *sequencer.Disposition) { d.Decision = "ship" }), nil, issuing.ErrBadDecision, `decision "ship"`},
		{"no reason", certs[0], with(func(d *sequencer.Disposition) { d.Reason = "  " }), nil, issuing.ErrBadDecision, "a reason is required"},
		{"two lines", certs[0], with(func(d *sequencer.Disposition) { d.Reason = "fine\nsigned: someone else" }), nil, issuing.ErrBadDecision, "control character"},
		{"stranger", certs[0], with(func(d *sequencer.Disposition) { d.Reviewer = "Mallory" }), nil, issuing.ErrNotReviewer, `nobody named "Mallory"`},
		{"operator", certs[0], with(func(d *sequencer.Disposition) { d.Reviewer = "Otto Benchley" }), nil, issuing.ErrNotReviewer, "may not decide"},
		{"station's key", certs[0], accept, is.Key, issuing.ErrNotReviewer, "is not Ada Quillfeather's"},
		{"unknown certificate", "TL1-000099", accept, nil, issuing.ErrNotHeld, "no certificate with that number"},
		{"engineering session", certs[0], accept, nil, issuing.ErrNotHeld, "an engineering session decides on no production unit"},
	} {
		is.Engineering = c.name == "engineering session"
		_, err := is.DisposeSigned(ctx, c.cert, c.d, c.key)
		is.Engineering = false
		if !errors.Is(err, c.want) || !strings.Contains(err.Error(), c.says) {
			t.Errorf("%s: %v, want %v saying %q", c.name, err, c.want, c.says)
		}
	}
	if q, _ := led.ReviewQueue(ctx, "TL1"); len(q) != 2 {
		t.Fatalf("refused decisions changed the queue: %+v", q)
	}

	at := time.Date(2026, 12, 2, 16, 30, 0, 0, time.UTC)
	accept.At = at
	acc, err := is.DisposeSigned(ctx, certs[0], accept, adaKey)
	if err != nil || acc == "" {
		t.Fatalf("accept: %q %v", acc, err)
	}
	old, _, _ := led.RunByCertificate(ctx, certs[0])
	rec, _, err := led.RunByCertificate(ctx, acc)
	if err != nil {
		t.Fatal(err)
	}
	d := rec.Disposition
	switch {
	case rec.Verdict != sequencer.Pass || rec.RetestOf != old.RunID || rec.RunID == old.RunID || rec.Serial != "BRX-00001":
		t.Errorf("the decision's record: verdict %s, retest of %q (want %q), run %s", rec.Verdict, rec.RetestOf, old.RunID, rec.RunID)
	case !rec.Started.Equal(at) || !rec.Finished.Equal(at) || rec.Operator != "Otto Benchley":
		t.Errorf("the decision's record: started %v finished %v operator %q", rec.Started, rec.Finished, rec.Operator)
	case d == nil || d.Of != old.RunID || d.OfCertificate != certs[0] || d.Reviewer != "Ada Quillfeather" || !d.Tested.Equal(old.Finished) ||
		d.Authenticated != "key "+adaKey.ID() || d.Reason != accept.Reason:
		t.Errorf("the decision's record: disposition %+v", d)
	}
	if st, err := led.CertificateStatus(ctx, certs[0]); err != nil || !st.Superseded || st.SupersededBy != acc {
		t.Errorf("the REVIEW certificate after the decision: %+v %v", st, err)
	}
	if docs, err := led.DocumentsFor(ctx, acc); err != nil || len(docs) != 1 {
		t.Errorf("the reissued certificate's documents: %+v %v", docs, err)
	} else if _, err := os.Stat(docs[0].Path + ".seal"); err != nil {
		t.Errorf("the reissued certificate has no seal: %v", err)
	}
	e, ok, err := led.ReviewDecision(ctx, certs[0])
	if err != nil || !ok || e.Reviewer != "Ada Quillfeather" || e.Decision != "accept" || e.Certificate != acc || e.Reason != accept.Reason || e.OfRunID != old.RunID {
		t.Fatalf("the audit trail's entry: %+v %v %v", e, ok, err)
	}
	sig, _ := base64.StdEncoding.DecodeString(e.Signature)
	signedAt, _ := time.Parse(time.RFC3339Nano, e.SignedAt)
	if e.KeyID != adaKey.ID() || !signing.Verify(adaKey.Public, signing.ReviewMessage(certs[0], "accept", "Ada Quillfeather", accept.Reason, signedAt), sig) {
		t.Errorf("the reviewer's signature does not verify over the decision: %+v", e)
	}
	if diffs, err := audit.Replay(ctx, led, rec); err != nil || len(diffs) != 0 {
		t.Errorf("replay of the decision: %q %v", diffs, err)
	}
	// audit verify: the REVIEW certificate is superseded by the decision's, which
	// is genuine and says who decided.
	trust, err := signing.TrustDir(filepath.Join(is.CertDir, "keys")) // demoFiles' keys; certificates go to the same folder
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct{ cert, kind, says string }{
		{certs[0], audit.Superseded, "superseded by " + acc + ": serial BRX-00001 held for REVIEW, was accepted on review by Ada Quillfeather"},
		{acc, audit.Genuine, `accepted on review by Ada Quillfeather on 2026-12-02 16:30 UTC (key ` + adaKey.ID() + `), replacing the REVIEW certificate ` + certs[0] +
			`: "offset rechecked on the bench meter: 4 µV"; the reviewer's signature in audit trail entry`},
		{acc, audit.Genuine, "verifies with key " + adaKey.ID()},
	} {
		docs, err := led.DocumentsFor(ctx, c.cert)
		if err != nil || len(docs) != 1 {
			t.Fatalf("%s: %v %v", c.cert, docs, err)
		}
		pdf, err := os.ReadFile(docs[0].Path)
		if err != nil {
			t.Fatal(err)
		}
		v, err := audit.Certificate(ctx, led, "ledger.db", docs[0].Path, pdf, trust)
		if err != nil || v.Kind != c.kind || !strings.Contains(strings.Join(v.Reasons, "\n"), c.says) {
			t.Errorf("verify %s: %s %q %v, want %s saying %q", c.cert, v.Kind, v.Reasons, err, c.kind, c.says)
		}
	}
	if q, _ := led.ReviewQueue(ctx, "TL1"); len(q) != 1 || q[0].Certificate != certs[1] {
		t.Errorf("queue after the decision: %+v", q)
	}
	// Decided once: neither the old certificate nor the new one is held.
	for _, c := range []struct{ cert, says string }{{certs[0], "superseded by " + acc}, {acc, "PASS (accepted on review by Ada Quillfeather), not held"}} {
		if _, err := is.Dispose(ctx, c.cert, accept); !errors.Is(err, issuing.ErrNotHeld) || !strings.Contains(err.Error(), c.says) {
			t.Errorf("%s decided again: %v, want saying %q", c.cert, err, c.says)
		}
	}

	rej, err := is.Dispose(ctx, certs[1], sequencer.Disposition{Decision: sequencer.DecisionReject, Reviewer: "Ada Quillfeather", Reason: "offset too near the limit for this customer"})
	if err != nil {
		t.Fatal(err)
	}
	rec, _, _ = led.RunByCertificate(ctx, rej)
	if rec.Verdict != sequencer.Fail || rec.Disposition.Authenticated != "named, not authenticated" {
		t.Errorf("rejected: %s, authenticated %q", rec.Verdict, rec.Disposition.Authenticated)
	}
	if e, ok, _ := led.ReviewDecision(ctx, certs[1]); !ok || e.Decision != "reject" || e.Signature != "" {
		t.Errorf("the reject's entry: %+v", e)
	}
	if q, _ := led.ReviewQueue(ctx, ""); len(q) != 0 {
		t.Errorf("queue after both decisions: %+v", q)
	}
	// A what-if re-judges each unit once: the decisions repeat their REVIEW
	// runs' measurements.
	units, _, err := whatif.Units(ctx, led, whatif.Request{})
	if err != nil || len(units) != 2 || units[0].OldVerdict != limits.VerdictReview || units[1].OldVerdict != limits.VerdictReview {
		t.Errorf("what-if units after the decisions: %d %v", len(units), err)
	}
}
