package ledger_test

import (
	"encoding/json"
	"errors"
	"strconv"
	"strings"
	"testing"
	"time"

	"trimline/reports/ledger"
	"trimline/sequencer"
)

// Source of expectations: 21 CFR 11.10(e) — a secure, computer-generated,
// time-stamped audit trail recording the date and time of operator entries and
// actions that create, modify or delete records, whose changes do not obscure
// previously recorded information. Here: voiding a certificate does not change the
// certificate or its run; the trail shows create, issue and void in that order, with
// who and when; entries can be neither updated nor deleted; each entry's hash covers
// the one before.
func TestAuditTrailVoid(t *testing.T) {
	l, path := openLedger(t)
	clock := time.Date(2025, 6, 3, 12, 0, 0, 0, time.UTC)
	l.Now = func() time.Time { clock = clock.Add(time.Second); return clock }

	rec := makeRecord("run-v", "SN-V", sequencer.Pass, smallShape)
	cert, err := l.RecordRunWith(ctx, rec, ledger.RecordOptions{Prefix: "TL1", Actor: "op17"})
	if err != nil {
		t.Fatal(err)
	}
	if err := l.AddDocument(ctx, "run-v", cert, "/certs/"+cert+".pdf", sha([]byte("pdf")), 3); err != nil {
		t.Fatal(err)
	}
	if st, err := l.CertificateStatus(ctx, cert); err != nil || st != (ledger.Status{Number: cert, RunID: "run-v"}) {
		t.Errorf("status before the void: %+v, %v", st, err)
	}
	if err := l.Audit(ctx, "eng-3", "limits-release", "amp10-limits.yaml", "rev D released"); err != nil {
		t.Fatal(err)
	}
	if err := l.VoidCertificate(ctx, cert, "qa-lead", "reference meter found out of calibration"); err != nil {
		t.Fatal(err)
	}

	// The certificate stays; its status comes from the trail.
	st, err := l.CertificateStatus(ctx, cert)
	want := ledger.Status{Number: cert, RunID: "run-v", Voided: true, VoidReason: "reference meter found out of calibration",
		VoidedBy: "qa-lead", VoidedAt: time.Date(2025, 6, 3, 12, 0, 4, 0, time.UTC)}
	if err != nil || st != want {
		t.Errorf("status %+v, %v\nwant %+v", st, err, want)
	}
	got, meta, err := l.RunByCertificate(ctx, cert)
	if err != nil || meta.Certificate != cert {
		t.Fatalf("the voided certificate's run: %v", err)
	}
	requireSameRecord(t, rec, got)
	if runs, _ := l.Runs(ctx, "SN-V"); len(runs) != 1 || runs[0].Certificate != cert {
		t.Errorf("runs after the void: %+v", runs)
	}

	trail, err := l.AuditTrail(ctx)
	if err != nil {
		t.Fatal(err)
	}
	type row struct{ actor, action, subject string }
	wantRows := []row{{"op17", "create", "run-v"}, {"op17", "issue", cert}, {"eng-3", "limits-release", "amp10-limits.yaml"}, {"qa-lead", "void", cert}}
	if len(trail) != len(wantRows) {
		t.Fatalf("trail has %d entries, want %d: %+v", len(trail), len(wantRows), trail)
	}
	prev := ""
	for i, e := range trail {
		if (row{e.Actor, e.Action, e.Subject}) != wantRows[i] || e.Seq != int64(i+1) || !e.At.Equal(time.Date(2025, 6, 3, 12, 0, i+1, 0, time.UTC)) {
			t.Errorf("entry %d: %+v, want %+v at 12:00:%02d", i, e, wantRows[i], i+1)
		}
		// Each hash covers the previous one (recomputed here from the documented line).
		at := e.At.Format("2006-01-02T15:04:05.000000000Z")
		line := "trimline-audit-v1\n" + prev + "\n" + strconv.FormatInt(e.Seq, 10) + "\n" + at + "\n"
		for _, f := range []string{e.Actor, e.Action, e.Subject, e.Detail} {
			line += strconv.Itoa(len(f)) + ":" + f + "\n"
		}
		if e.PrevHash != prev || e.Hash != sha([]byte(line)) {
			t.Errorf("entry %d: prev %s hash %s, want %s %s", e.Seq, e.PrevHash, e.Hash, prev, sha([]byte(line)))
		}
		prev = e.Hash
	}
	var create struct {
		Certificate, Verdict, Station string
		RecordSHA256                  string `json:"record_sha256"`
		ChainHash                     string `json:"chain_hash"`
	}
	if err := json.Unmarshal([]byte(trail[0].Detail), &create); err != nil {
		t.Fatal(err)
	}
	if create.Certificate != cert || create.Verdict != "PASS" || create.Station != "EOL-2" || create.RecordSHA256 != meta.RecordSHA256 || create.ChainHash != meta.ChainHash {
		t.Errorf("create detail %s", trail[0].Detail)
	}
	if !strings.Contains(trail[3].Detail, `"reason":"reference meter found out of calibration"`) {
		t.Errorf("void detail %s", trail[3].Detail)
	}

	// No second void; the ledger's own actions cannot be written through Audit;
	// every entry names who did it.
	if err := l.VoidCertificate(ctx, cert, "qa-lead", "again"); !errors.Is(err, ledger.ErrVoided) {
		t.Errorf("second void: %v, want ErrVoided", err)
	}
	for name, err := range map[string]error{
		"void without reason": l.VoidCertificate(ctx, cert, "qa-lead", " "),
		"void without actor":  l.VoidCertificate(ctx, cert, "", "r"),
		"audit void":          l.Audit(ctx, "x", "void", cert, "forged"),
		"audit create":        l.Audit(ctx, "x", "create", "run-x", "{}"),
		"audit no actor":      l.Audit(ctx, "", "login", "", ""),
		"audit no action":     l.Audit(ctx, "x", "", "", ""),
	} {
		if !errors.Is(err, ledger.ErrInvalid) {
			t.Errorf("%s: %v, want ErrInvalid", name, err)
		}
	}
	if err := l.VoidCertificate(ctx, "TL1-000099", "qa-lead", "r"); !errors.Is(err, ledger.ErrNotFound) {
		t.Errorf("void of an unknown certificate: %v", err)
	}
	if _, err := l.CertificateStatus(ctx, "TL1-000099"); !errors.Is(err, ledger.ErrNotFound) {
		t.Errorf("status of an unknown certificate: %v", err)
	}

	// Secure: the file refuses changes and deletions of entries.
	db := rawDB(t, path)
	for _, q := range []string{
		`UPDATE audit_trail SET detail = '{}' WHERE action = 'void'`,
		`UPDATE audit_trail SET actor = 'someone else'`,
		`DELETE FROM audit_trail WHERE action = 'void'`,
		`DELETE FROM audit_trail`,
	} {
		if _, err := db.Exec(q); err == nil {
			t.Errorf("%s: allowed", q)
		}
	}
	if n, _ := l.AuditTrail(ctx); len(n) != 4 {
		t.Errorf("%d entries after the refused changes", len(n))
	}
	rep, err := l.VerifyChain(ctx, "")
	if err != nil || !rep.OK || rep.AuditEntries != 4 || rep.AuditHead != prev {
		t.Errorf("VerifyChain %+v, %v", rep, err)
	}

	// An entry removed behind the triggers' back (the triggers put back afterwards)
	// breaks the trail at the entry after it.
	if _, err := db.Exec(`DROP TRIGGER audit_trail_no_delete; DELETE FROM audit_trail WHERE seq = 2; ` +
		`CREATE TRIGGER audit_trail_no_delete BEFORE DELETE ON audit_trail BEGIN SELECT RAISE(ABORT, 'ledger: the audit trail is append-only'); END;`); err != nil {
		t.Fatal(err)
	}
	rep, err = l.VerifyChain(ctx, "")
	if err != nil || rep.OK || rep.BrokenAuditSeq != 3 || !strings.Contains(rep.Reason, "missing") {
		t.Errorf("after deleting entry 2: %+v, %v", rep, err)
	}
}

// A signed void keeps its signature, key and signing time with the entry, and
// CertificateStatus returns them for an auditor to check; the chain still
// verifies.
func TestSignedVoid(t *testing.T) {
	l, _ := openLedger(t)
	rec := makeRecord("run-s", "SN-S", sequencer.Pass, smallShape)
	cert, err := l.RecordRunWith(ctx, rec, ledger.RecordOptions{Prefix: "TL1", Actor: "op17"})
	if err != nil {
		t.Fatal(err)
	}
	at := time.Date(2026, 3, 14, 9, 41, 55, 120000000, time.UTC)
	sig := ledger.VoidSignature{At: at, KeyID: "ed25519:0123456789abcdef", Signature: "c2lnbmF0dXJl"}
	if err := l.SignedVoid(ctx, cert, "Dana Whitfield", "wrong limit file", ledger.VoidSignature{KeyID: "ed25519:x"}); !errors.Is(err, ledger.ErrInvalid) {
		t.Errorf("a signature without its time: %v", err)
	}
	if err := l.SignedVoid(ctx, cert, "Dana Whitfield", "wrong limit file", sig); err != nil {
		t.Fatal(err)
	}
	st, err := l.CertificateStatus(ctx, cert)
	if err != nil || !st.Voided || st.VoidedBy != "Dana Whitfield" || st.VoidSignature != sig {
		t.Errorf("status %+v, %v", st, err)
	}
	if rep, err := l.VerifyChain(ctx, ""); err != nil || !rep.OK {
		t.Errorf("chain after a signed void: %+v %v", rep, err)
	}
}
