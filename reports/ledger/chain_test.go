package ledger_test

import (
	"bytes"
	"crypto/ed25519"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"reflect"
	"slices"
	"strings"
	"testing"
	"time"

	"trimline/reports/ledger"
	"trimline/reports/signing"
	"trimline/sequencer"
)

// testSigner signs with ed25519 keys derived from their ids (seed = SHA-256 of the id).
type testSigner struct{ keys map[string]ed25519.PrivateKey }

func newSigner(ids ...string) *testSigner {
	s := &testSigner{keys: map[string]ed25519.PrivateKey{}}
	for _, id := range ids {
		seed := sha256.Sum256([]byte(id))
		s.keys[id] = ed25519.NewKeyFromSeed(seed[:])
	}
	return s
}

// sign returns a RecordOptions.Sign that signs with key id.
func (s *testSigner) sign(id string) func(number, runID, recordSHA string) (string, []byte, error) {
	return func(number, runID, recordSHA string) (string, []byte, error) {
		return id, ed25519.Sign(s.keys[id], signing.RecordMessage(number, runID, recordSHA)), nil
	}
}

func (s *testSigner) verify(keyID string, msg, sig []byte) bool {
	k, ok := s.keys[keyID]
	return ok && ed25519.Verify(k.Public().(ed25519.PublicKey), msg, sig)
}

// filesInForce returns three file contents keyed by their SHA-256 and the FileRefs
// naming them.
func filesInForce(tag string) (map[string][]byte, []sequencer.FileRef) {
	files := map[string][]byte{}
	var refs []sequencer.FileRef
	for _, kind := range []string{"station", "sequence", "limits"} {
		data := []byte(fmt.Sprintf("# %s file %s\nid: x\n", kind, tag))
		s := sha(data)
		files[s] = data
		refs = append(refs, sequencer.FileRef{Kind: kind, Name: kind + ".yaml", Title: kind, SHA256: s})
	}
	return files, refs
}

var smallShape = recordShape{sweeps: 1, points: 2, readings: 1}

// Source of expectations: hand-worked. The vectors were computed outside Go with
// printf '…' | sha256sum from the lines documented in RecordRunWith and audit.go.
func TestChainVectors(t *testing.T) {
	a, b := strings.Repeat("a", 64), strings.Repeat("b", 64)
	h1 := ledger.ChainHash("", "run-1", "TL1-000001", a, "PASS", "k1", []byte{0x01, 0xab})
	if h1 != "06b77efc6ba8c5545a92c84d485bc69bbb16ea10b37ae6ca55ce89e7ea747f61" {
		t.Errorf("first link %s", h1)
	}
	// An uncertified, unsigned run: empty certificate, key id and signature.
	if h2 := ledger.ChainHash(h1, "run-2", "", b, "FAULT", "", nil); h2 != "c48af238741b68f4e303bf6b0d82c5d01e3fb1e1719b989d63f624c2492f2e82" {
		t.Errorf("second link %s", h2)
	}
	if h := ledger.AuditHash("", 1, "2025-06-03T10:00:00.000000000Z", "op17", "create", "run-1", `{"x":1}`); h != "7f432f48903d73bd88c503270ace49c2243872802ed5f919cee127dc97cf0750" {
		t.Errorf("audit entry 1: %s", h)
	}
	// A line break inside a field is kept apart by the length prefix.
	if h := ledger.AuditHash(h1, 2, "2025-06-03T10:00:01.000000000Z", "qa\nlead", "void", "TL1-000001", ""); h != "d716784c3d5bca922f7623798dede3d97d54a632588edb9cdcd228b428f04f99" {
		t.Errorf("audit entry 2: %s", h)
	}
	if got := string(signing.RecordMessage("TL1-000007", "run-9", a)); got != "trimline-record-v1\nTL1-000007\nrun-9\n"+a {
		t.Errorf("RecordMessage = %q", got)
	}
}

// The stored links are those of the documented line, recomputed here independently
// of the package (source of expectations: hand-worked), and the Sign callback gets
// the number, run id and the SHA-256 of exactly the stored bytes.
func TestChainStoredLinks(t *testing.T) {
	l, path := openLedger(t)
	signer := newSigner("station-key-1")
	type call struct{ number, runID, sha string }
	var calls []call
	sign := func(number, runID, recordSHA string) (string, []byte, error) {
		calls = append(calls, call{number, runID, recordSHA})
		return signer.sign("station-key-1")(number, runID, recordSHA)
	}
	steps := []struct {
		id, station string
		verdict     sequencer.Verdict
		signed      bool
		cert        string
	}{
		{"a1", "EOL-A", sequencer.Pass, true, "TL1-000001"},
		{"b1", "EOL-B", sequencer.Fault, true, ""},
		{"a2", "EOL-A", sequencer.Fail, false, "TL1-000002"},
		{"a3", "EOL-A", sequencer.Aborted, true, ""},
		{"b2", "EOL-B", sequencer.Review, true, "TL1-000003"},
	}
	for _, s := range steps {
		rec := makeRecord(s.id, "SN-"+s.id, s.verdict, smallShape)
		rec.Station = s.station
		opt := ledger.RecordOptions{Prefix: "TL1"}
		if s.signed {
			opt.Sign = sign
		}
		cert, err := l.RecordRunWith(ctx, rec, opt)
		if err != nil {
			t.Fatal(err)
		}
		if cert != s.cert {
			t.Errorf("%s: certificate %q, want %q", s.id, cert, s.cert)
		}
		want, err := ledger.RecordSHA256(rec)
		if err != nil {
			t.Fatal(err)
		}
		if s.signed && calls[len(calls)-1] != (call{s.cert, s.id, want}) {
			t.Errorf("%s: Sign called with %+v, want %q %q %q", s.id, calls[len(calls)-1], s.cert, s.id, want)
		}
	}
	if len(calls) != 4 {
		t.Errorf("Sign called %d times, want 4", len(calls))
	}

	db := rawDB(t, path)
	prev := map[string]string{}
	seq := map[string]int64{}
	for _, s := range steps {
		var doc, sig []byte
		var sum, keyID, chainPrev, chainHash string
		var chainSeq int64
		if err := db.QueryRow(`SELECT record_json, record_sha256, key_id, signature, chain_prev, chain_hash, chain_seq FROM runs WHERE run_id = ?`, s.id).
			Scan(&doc, &sum, &keyID, &sig, &chainPrev, &chainHash, &chainSeq); err != nil {
			t.Fatal(err)
		}
		rec, _ := l.Run(ctx, s.id)
		canon, err := ledger.Canonical(rec)
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(canon, doc) || sha(doc) != sum {
			t.Errorf("%s: Canonical of the record read back differs from record_json", s.id)
		}
		line := "trimline-chain-v1\n" + prev[s.station] + "\n" + s.id + "\n" + s.cert + "\n" + sum + "\n" + string(s.verdict) + "\n" + keyID + "\n" + hex.EncodeToString(sig)
		if chainPrev != prev[s.station] || chainHash != sha([]byte(line)) || chainSeq != seq[s.station]+1 {
			t.Errorf("%s: link prev %q hash %s seq %d, want prev %q hash %s seq %d", s.id, chainPrev, chainHash, chainSeq, prev[s.station], sha([]byte(line)), seq[s.station]+1)
		}
		if s.signed != (keyID == "station-key-1") || s.signed != (len(sig) == ed25519.SignatureSize) {
			t.Errorf("%s: key %q, %d signature bytes", s.id, keyID, len(sig))
		}
		if s.signed && !signer.verify(keyID, []byte("trimline-record-v1\n"+s.cert+"\n"+s.id+"\n"+sum), sig) {
			t.Errorf("%s: the signature does not cover the documented message", s.id)
		}
		prev[s.station], seq[s.station] = chainHash, chainSeq
	}

	rep, err := l.VerifyChain(ctx, "", ledger.ChainOptions{Verify: signer.verify})
	if err != nil {
		t.Fatal(err)
	}
	if !rep.OK || rep.Stations != 2 || rep.Runs != 5 || rep.Signed != 4 || rep.Verified != 4 || rep.Unsigned != 1 ||
		rep.Certificates != 3 || rep.AuditEntries != 5 || rep.Heads["EOL-A"] != prev["EOL-A"] || rep.Heads["EOL-B"] != prev["EOL-B"] {
		t.Errorf("VerifyChain = %+v", rep)
	}
	rep, _ = l.VerifyChain(ctx, "EOL-B", ledger.ChainOptions{Verify: signer.verify})
	if !rep.OK || rep.Station != "EOL-B" || rep.Stations != 1 || rep.Runs != 2 || len(rep.Heads) != 1 {
		t.Errorf("VerifyChain(EOL-B) = %+v", rep)
	}
	// A key the verifier does not trust, and a ledger that must be signed throughout.
	rep, _ = l.VerifyChain(ctx, "", ledger.ChainOptions{Verify: newSigner("other").verify})
	if rep.OK || rep.BrokenAt != "a1" || !strings.Contains(rep.Reason, "does not verify") {
		t.Errorf("untrusted key: %+v", rep)
	}
	rep, _ = l.VerifyChain(ctx, "", ledger.ChainOptions{RequireSignatures: true})
	if rep.OK || rep.BrokenAt != "a2" || !strings.Contains(rep.Reason, "not signed") {
		t.Errorf("RequireSignatures: %+v", rep)
	}
	if _, err := l.VerifyChain(ctx, "", ledger.ChainOptions{}, ledger.ChainOptions{}); !errors.Is(err, ledger.ErrInvalid) {
		t.Errorf("two ChainOptions: %v", err)
	}

	// RunByCertificate gives the record and its meta.
	rec, meta, err := l.RunByCertificate(ctx, "TL1-000003")
	if err != nil {
		t.Fatal(err)
	}
	if rec.RunID != "b2" || meta.RunID != "b2" || meta.Certificate != "TL1-000003" || meta.KeyID != "station-key-1" ||
		meta.ChainHash != prev["EOL-B"] || !signer.verify(meta.KeyID, signing.RecordMessage(meta.Certificate, meta.RunID, meta.RecordSHA256), meta.Signature) {
		t.Errorf("RunByCertificate meta %+v", meta)
	}
	if _, _, err := l.RunByCertificate(ctx, "TL1-000099"); !errors.Is(err, ledger.ErrNotFound) {
		t.Errorf("unknown certificate: %v", err)
	}
	if _, err := ledger.Canonical(nil); !errors.Is(err, ledger.ErrInvalid) {
		t.Errorf("Canonical(nil): %v", err)
	}
}

// A Sign error rolls the whole run back and takes no number with it; so does a
// signature the ledger cannot store unambiguously. Source of expectations: hand-worked.
func TestSignErrorRollsBack(t *testing.T) {
	l, _ := openLedger(t)
	files, refs := filesInForce("v1")
	errHSM := errors.New("hsm: not reachable")
	for _, c := range []struct {
		name string
		sign func(number, runID, recordSHA string) (string, []byte, error)
		want error
	}{
		{"sign error", func(string, string, string) (string, []byte, error) { return "", nil, errHSM }, errHSM},
		{"no key id", func(string, string, string) (string, []byte, error) { return "", []byte{1}, nil }, ledger.ErrInvalid},
		{"nothing", func(string, string, string) (string, []byte, error) { return "", nil, nil }, ledger.ErrInvalid},
		{"no signature", func(string, string, string) (string, []byte, error) { return "k", nil, nil }, ledger.ErrInvalid},
		{"line break in key id", func(string, string, string) (string, []byte, error) { return "k\n1", []byte{1}, nil }, ledger.ErrInvalid},
	} {
		rec := makeRecord("r1", "SN1", sequencer.Pass, smallShape)
		rec.Files = refs
		var gotNumber string
		sign := func(number, runID, recordSHA string) (string, []byte, error) {
			gotNumber = number
			return c.sign(number, runID, recordSHA)
		}
		_, err := l.RecordRunWith(ctx, rec, ledger.RecordOptions{Prefix: "TL1", Files: files, Sign: sign})
		if !errors.Is(err, c.want) {
			t.Errorf("%s: %v, want %v", c.name, err, c.want)
		}
		if gotNumber != "TL1-000001" {
			t.Errorf("%s: Sign saw number %q, want TL1-000001 (allocated before signing)", c.name, gotNumber)
		}
	}
	counts, err := l.Counts(ctx)
	if err != nil {
		t.Fatal(err)
	}
	for table, n := range counts {
		if n != 0 {
			t.Errorf("after refused runs: %d rows in %s", n, table)
		}
	}
	if got := mustRecord(t, l, makeRecord("r1", "SN1", sequencer.Pass, smallShape), "TL1"); got != "TL1-000001" {
		t.Errorf("after the refused runs: %q, want TL1-000001", got)
	}
	if rep, err := l.VerifyChain(ctx, ""); err != nil || !rep.OK {
		t.Errorf("VerifyChain %+v %v", rep, err)
	}
	// A run id with a line break would make the chain line ambiguous.
	if _, err := l.RecordRun(ctx, makeRecord("r\n2", "SN1", sequencer.Pass, smallShape), "TL1"); !errors.Is(err, ledger.ErrInvalid) {
		t.Errorf("run id with a line break: %v", err)
	}
}

// The files in force are stored once per content, checked against their keys, and
// read back checked. Source of expectations: hand-worked.
func TestBlobs(t *testing.T) {
	l, path := openLedger(t)
	files, refs := filesInForce("v1")
	for i := range 3 {
		rec := makeRecord(fmt.Sprintf("r%d", i), "SN1", sequencer.Pass, smallShape)
		rec.Files = refs
		if _, err := l.RecordRunWith(ctx, rec, ledger.RecordOptions{Prefix: "TL1", Files: files}); err != nil {
			t.Fatal(err)
		}
	}
	// A new limits file: one more blob; the station and sequence files are shared.
	files2, refs2 := filesInForce("v1")
	limits := []byte("# limits v2\n")
	delete(files2, refs2[2].SHA256)
	refs2[2].SHA256 = sha(limits)
	files2[sha(limits)] = limits
	files2[sha([]byte("not in force"))] = []byte("not in force") // checked, not stored
	rec := makeRecord("r3", "SN1", sequencer.Pass, smallShape)
	rec.Files = refs2
	if _, err := l.RecordRunWith(ctx, rec, ledger.RecordOptions{Prefix: "TL1", Files: files2}); err != nil {
		t.Fatal(err)
	}
	counts, _ := l.Counts(ctx)
	if counts["blobs"] != 4 || counts["files"] != 12 {
		t.Errorf("%d blobs and %d file rows, want 4 and 12", counts["blobs"], counts["files"])
	}
	var total int64
	if err := rawDB(t, path).QueryRow(`SELECT sum(size) FROM blobs`).Scan(&total); err != nil {
		t.Fatal(err)
	}
	var want int64
	for _, d := range files {
		want += int64(len(d))
	}
	if want += int64(len(limits)); total != want {
		t.Errorf("blobs hold %d bytes, want %d", total, want)
	}
	for s, d := range files {
		got, err := l.Blob(ctx, strings.ToUpper(s))
		if err != nil || !bytes.Equal(got, d) {
			t.Errorf("Blob(%s) = %q, %v", s, got, err)
		}
	}
	if _, err := l.Blob(ctx, sha([]byte("not in force"))); !errors.Is(err, ledger.ErrNotFound) {
		t.Errorf("unreferenced content: %v, want ErrNotFound", err)
	}
	if _, err := l.Blob(ctx, "xyz"); !errors.Is(err, ledger.ErrInvalid) {
		t.Errorf("bad hash: %v", err)
	}

	// A content under the wrong key, or a key not in lowercase hex, is refused, and
	// the run is not stored: no number is consumed.
	for name, bad := range map[string]map[string][]byte{
		"wrong key":      {refs[0].SHA256: []byte("other content")},
		"upper-case key": {strings.ToUpper(sha(limits)): limits},
		"short key":      {"abc": nil},
	} {
		rec := makeRecord("bad", "SN1", sequencer.Pass, smallShape)
		rec.Files = refs
		if _, err := l.RecordRunWith(ctx, rec, ledger.RecordOptions{Prefix: "TL1", Files: bad}); !errors.Is(err, ledger.ErrInvalid) {
			t.Errorf("%s: %v, want ErrInvalid", name, err)
		}
	}
	if got := mustRecord(t, l, makeRecord("r4", "SN1", sequencer.Pass, smallShape), "TL1"); got != "TL1-000005" {
		t.Errorf("after refused files: %q, want TL1-000005", got)
	}
	if rep, err := l.VerifyChain(ctx, ""); err != nil || !rep.OK || rep.Blobs != 4 {
		t.Errorf("VerifyChain %+v %v", rep, err)
	}

	// Changed bytes are caught on reading.
	db := rawDB(t, path)
	if _, err := db.Exec(`DROP TRIGGER blobs_no_update; UPDATE blobs SET data = CAST('# station file v9' AS BLOB) WHERE sha256 = ?`, refs[0].SHA256); err != nil {
		t.Fatal(err)
	}
	if _, err := l.Blob(ctx, refs[0].SHA256); !errors.Is(err, ledger.ErrCorrupt) {
		t.Errorf("changed blob: %v, want ErrCorrupt", err)
	}
}

// Documents carry their signature; they are found by hash and by certificate; a
// certified run without one is found for repair. Source of expectations: hand-worked.
func TestDocumentsAndMissing(t *testing.T) {
	l, _ := openLedger(t)
	created := time.Date(2025, 6, 3, 12, 0, 0, 42, zone)
	l.Now = func() time.Time { return created }
	for i, v := range []sequencer.Verdict{sequencer.Pass, sequencer.Fault, sequencer.Fail, sequencer.Review, sequencer.Pass} {
		mustRecord(t, l, makeRecord(fmt.Sprintf("r%d", i), "SN1", v, smallShape), "TL1")
	}
	// r0 TL1-000001, r2 TL1-000002, r3 TL1-000003, r4 TL1-000004; r1 is a FAULT.
	missing := func() []string {
		t.Helper()
		m, err := l.MissingDocuments(ctx)
		if err != nil {
			t.Fatal(err)
		}
		var out []string
		for _, r := range m {
			out = append(out, r.RunID+" "+r.Certificate)
		}
		return out
	}
	if got := missing(); !slices.Equal(got, []string{"r0 TL1-000001", "r2 TL1-000002", "r3 TL1-000003", "r4 TL1-000004"}) {
		t.Errorf("MissingDocuments = %v", got)
	}
	pdf := []byte("%PDF-1.7 TL1-000001")
	doc := ledger.Document{RunID: "r0", Number: "TL1-000001", Path: "/certs/TL1-000001.pdf", SHA256: strings.ToUpper(sha(pdf)),
		Size: int64(len(pdf)), KeyID: "pdf-key", Signature: []byte{9, 8, 7}}
	if err := l.AddSignedDocument(ctx, doc); err != nil {
		t.Fatal(err)
	}
	if err := l.AddDocument(ctx, "r2", "TL1-000002", "/certs/TL1-000002.pdf", sha([]byte("two")), 3); err != nil {
		t.Fatal(err)
	}
	if err := l.VoidCertificate(ctx, "TL1-000003", "qa", "unit scrapped"); err != nil {
		t.Fatal(err)
	}
	// r4's process stopped between the commit and the PDF: it alone is to repair.
	if got := missing(); !slices.Equal(got, []string{"r4 TL1-000004"}) {
		t.Errorf("MissingDocuments = %v, want [r4 TL1-000004]", got)
	}

	got, err := l.DocumentBySHA(ctx, sha(pdf))
	doc.SHA256, doc.CreatedAt = sha(pdf), created.UTC()
	if err != nil || !reflect.DeepEqual(*got, doc) {
		t.Errorf("DocumentBySHA = %+v, %v\nwant %+v", got, err, doc)
	}
	if _, err := l.DocumentBySHA(ctx, sha([]byte("none"))); !errors.Is(err, ledger.ErrNotFound) {
		t.Errorf("unknown document: %v", err)
	}
	reissue := doc
	reissue.Path, reissue.Signature = "/certs/again.pdf", []byte{1}
	if err := l.AddSignedDocument(ctx, reissue); err != nil {
		t.Fatal(err)
	}
	docs, err := l.DocumentsFor(ctx, "TL1-000001")
	if err != nil || len(docs) != 2 || docs[0].Path != doc.Path || docs[1].Path != "/certs/again.pdf" || docs[1].KeyID != "pdf-key" {
		t.Errorf("DocumentsFor = %+v, %v", docs, err)
	}
	if docs, err := l.DocumentsFor(ctx, "TL1-000004"); err != nil || docs == nil || len(docs) != 0 {
		t.Errorf("DocumentsFor(no documents) = %#v, %v", docs, err)
	}
	if _, err := l.DocumentsFor(ctx, "TL1-000099"); !errors.Is(err, ledger.ErrNotFound) {
		t.Errorf("DocumentsFor(unknown): %v", err)
	}
	for name, d := range map[string]ledger.Document{
		"key without signature": {RunID: "r4", Number: "TL1-000004", Path: "p", SHA256: sha(pdf), KeyID: "k"},
		"signature without key": {RunID: "r4", Number: "TL1-000004", Path: "p", SHA256: sha(pdf), Signature: []byte{1}},
		"run without number":    {RunID: "r1", Number: "", Path: "p", SHA256: sha(pdf)},
	} {
		if err := l.AddSignedDocument(ctx, d); !errors.Is(err, ledger.ErrInvalid) {
			t.Errorf("%s: %v, want ErrInvalid", name, err)
		}
	}
	if err := l.AddDocument(ctx, "r3", "TL1-000003", "/certs/x.pdf", sha(pdf), 1); !errors.Is(err, ledger.ErrVoided) {
		t.Errorf("document for a voided certificate: %v, want ErrVoided", err)
	}
	if rep, err := l.VerifyChain(ctx, ""); err != nil || !rep.OK || rep.Documents != 3 || rep.AuditEntries != 5+3+1 {
		t.Errorf("VerifyChain %+v %v", rep, err)
	}
}

// ledger0002 makes a ledger file as trimline made it before migration 0003: the
// 0001 and 0002 schema, and, in this order, runs a1 (EOL-A, PASS, OLD-000001), b1
// (EOL-B, FAIL, OLD-000002), a2 (EOL-A, FAULT) and a3 (EOL-A, REVIEW, OLD-000003),
// with documents for OLD-000001 (two) and OLD-000002.
func ledger0002(t *testing.T) string {
	t.Helper()
	path := filepath.Join(t.TempDir(), "v2.db")
	db, exec := oldFile(t, path)
	defer db.Close()
	for i, name := range []string{"0001_init.sql", "0002_uncertainty.sql"} {
		q, err := os.ReadFile(filepath.Join("migrations", name))
		if err != nil {
			t.Fatal(err)
		}
		exec(string(q))
		exec(`INSERT INTO schema_migrations VALUES (?, ?, '2025-01-02T03:04:05.000000000Z')`, i+1, strings.TrimSuffix(name[5:], ".sql"))
	}
	exec(`INSERT INTO units VALUES ('SN-OLD', 'AMP-10', '2025-06-03T07:14:27.123456789Z', '2025-06-03T07:15:08.123456796Z')`)
	exec(`INSERT INTO cert_sequences VALUES ('OLD', 3)`)
	for _, r := range []struct {
		id, station string
		verdict     sequencer.Verdict
		cert        any
	}{
		{"a1", "EOL-A", sequencer.Pass, "OLD-000001"},
		{"b1", "EOL-B", sequencer.Fail, "OLD-000002"},
		{"a2", "EOL-A", sequencer.Fault, nil},
		{"a3", "EOL-A", sequencer.Review, "OLD-000003"},
	} {
		rec := makeRecord(r.id, "SN-OLD", r.verdict, smallShape)
		rec.Station = r.station
		doc, err := ledger.CanonicalJSON(rec)
		if err != nil {
			t.Fatal(err)
		}
		reasons, _ := json.Marshal(append([]string{}, rec.Reasons...))
		var fault any
		if rec.Fault != "" {
			fault = rec.Fault
		}
		exec(`INSERT INTO runs (run_id, serial, product, revision, station, operator, software, started, finished,
			verdict, fault, reasons, certificate, record_json, record_sha256, coverage, ambient_c, ambient_source) VALUES (?, 'SN-OLD', 'AMP-10', 'C', ?, 'op17', 'trimline 0.1.0',
			'2025-06-03T07:14:27.123456789Z', '2025-06-03T07:15:08.123456796Z', ?, ?, ?, ?, ?, ?, 0.9545, 23.1, 'entered')`,
			r.id, r.station, string(r.verdict), fault, string(reasons), r.cert, string(doc), sha(doc))
		insertRecordRows(t, db, exec, rec)
	}
	exec(`INSERT INTO documents VALUES ('a1', 'OLD-000001', '/c/OLD-000001.pdf', ?, 10, '2025-06-03T07:16:00.000000000Z')`, strings.Repeat("1", 64))
	exec(`INSERT INTO documents VALUES ('b1', 'OLD-000002', '/c/OLD-000002.pdf', ?, 11, '2025-06-03T07:17:00.000000000Z')`, strings.Repeat("2", 64))
	exec(`INSERT INTO documents VALUES ('a1', 'OLD-000001', '/c/OLD-000001-reissue.pdf', ?, 12, '2025-06-03T07:18:00.000000000Z')`, strings.Repeat("3", 64))
	return path
}

// Opening a 0002 ledger backfills the chain of its runs in insertion order, station
// by station, unsigned, and the audit trail with a create entry per run followed by
// an issue entry per document; new runs continue the chains. Source of
// expectations: hand-worked (the links are recomputed here from the documented line).
func TestChainBackfillFrom0002(t *testing.T) {
	path := ledger0002(t)
	l, err := ledger.Open(ctx, path)
	if err != nil {
		t.Fatalf("open 0002 ledger: %v", err)
	}
	defer l.Close()
	db := rawDB(t, path)
	prev := map[string]string{}
	for i, id := range []string{"a1", "b1", "a2", "a3"} {
		var station, cert, sum, verdict, keyID, chainPrev, chainHash string
		var sig []byte
		var chainSeq int64
		if err := db.QueryRow(`SELECT station, coalesce(certificate, ''), record_sha256, verdict, key_id, signature, chain_prev, chain_hash, chain_seq FROM runs WHERE run_id = ?`, id).
			Scan(&station, &cert, &sum, &verdict, &keyID, &sig, &chainPrev, &chainHash, &chainSeq); err != nil {
			t.Fatal(err)
		}
		want := sha([]byte("trimline-chain-v1\n" + prev[station] + "\n" + id + "\n" + cert + "\n" + sum + "\n" + verdict + "\n\n"))
		wantSeq := []int64{1, 1, 2, 3}[i]
		if keyID != "" || len(sig) != 0 || chainPrev != prev[station] || chainHash != want || chainSeq != wantSeq {
			t.Errorf("%s: key %q sig %x prev %q hash %s seq %d, want prev %q hash %s seq %d", id, keyID, sig, chainPrev, chainHash, chainSeq, prev[station], want, wantSeq)
		}
		prev[station] = chainHash
	}
	trail, err := l.AuditTrail(ctx)
	if err != nil {
		t.Fatal(err)
	}
	var got []string
	for _, e := range trail {
		got = append(got, e.Action+" "+e.Subject)
		if e.Actor != "trimline migration 0003" || !strings.Contains(e.Detail, "backfilled by migration 0003") || time.Since(e.At) > time.Minute {
			t.Errorf("backfilled entry %+v", e)
		}
	}
	if want := []string{"create a1", "issue OLD-000001", "issue OLD-000001", "create b1", "issue OLD-000002", "create a2", "create a3"}; !slices.Equal(got, want) {
		t.Errorf("backfilled trail %v\nwant %v", got, want)
	}
	rep, err := l.VerifyChain(ctx, "")
	if err != nil || !rep.OK || rep.Stations != 2 || rep.Runs != 4 || rep.Unsigned != 4 || rep.Documents != 3 || rep.AuditEntries != 7 || rep.Certificates != 3 {
		t.Errorf("VerifyChain after upgrade %+v %v", rep, err)
	}
	// The REVIEW run had no document: it is to repair.
	if m, err := l.MissingDocuments(ctx); err != nil || len(m) != 1 || m[0].RunID != "a3" || m[0].ChainHash != prev["EOL-A"] {
		t.Errorf("MissingDocuments after upgrade %+v %v", m, err)
	}

	// A new run of EOL-A continues its chain and the certificate sequence.
	rec := makeRecord("a4", "SN-OLD", sequencer.Pass, smallShape)
	rec.Station = "EOL-A"
	if cert := mustRecord(t, l, rec, "OLD"); cert != "OLD-000004" {
		t.Errorf("new run: %q", cert)
	}
	var chainPrev string
	var chainSeq int64
	if err := db.QueryRow(`SELECT chain_prev, chain_seq FROM runs WHERE run_id = 'a4'`).Scan(&chainPrev, &chainSeq); err != nil {
		t.Fatal(err)
	}
	if chainPrev != prev["EOL-A"] || chainSeq != 4 {
		t.Errorf("new run links to %q at %d, want %q at 4", chainPrev, chainSeq, prev["EOL-A"])
	}
	if rep, err := l.VerifyChain(ctx, ""); err != nil || !rep.OK || rep.Runs != 5 {
		t.Errorf("VerifyChain after a new run %+v %v", rep, err)
	}
	// Still append-only, and a run cannot be inserted without its link.
	for _, q := range []string{
		`UPDATE runs SET chain_hash = '' WHERE run_id = 'a1'`,
		`INSERT INTO runs (run_id, serial, product, revision, station, operator, software, started, finished, verdict, reasons, certificate, record_json, record_sha256)
			VALUES ('x', 'SN-OLD', '', '', 'EOL-A', '', '', '', '', 'FAULT', '[]', NULL, '{}', '')`,
	} {
		if _, err := db.Exec(q); err == nil {
			t.Errorf("allowed after upgrade: %s", q)
		}
	}
	_, fresh := openLedger(t)
	if got, want := schemaOf(t, db), schemaOf(t, rawDB(t, fresh)); !reflect.DeepEqual(got, want) {
		t.Errorf("upgraded schema differs from a new ledger's:\n%s\nvs\n%s", strings.Join(got, "\n"), strings.Join(want, "\n"))
	}
}
