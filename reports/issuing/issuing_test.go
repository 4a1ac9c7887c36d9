package issuing_test

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"io/fs"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	_ "trimline/instruments/sim" // the simulated bench, scheme sim://
	"trimline/reports/certificate"
	"trimline/reports/issuing"
	"trimline/reports/ledger"
	"trimline/reports/signing"
	"trimline/sequencer"
	"trimline/sequences"
)

// demoFiles writes the demo files into dir, with calibrations due a year from now
// and the station's signing key made, and loads them.
func demoFiles(t *testing.T, dir string) (*sequencer.Station, *sequencer.Sequence) {
	t.Helper()
	calDue := regexp.MustCompile(`(?m)^(\s*cal_due:\s*)\d{4}-\d{2}-\d{2}`)
	entries, err := fs.ReadDir(sequences.Demo, ".")
	if err != nil {
		t.Fatal(err)
	}
	for _, e := range entries {
		data, _ := fs.ReadFile(sequences.Demo, e.Name())
		data = calDue.ReplaceAll(data, []byte("${1}"+time.Now().AddDate(1, 0, 0).Format("2006-01-02")))
		if err := os.WriteFile(filepath.Join(dir, e.Name()), data, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	if _, _, err := signing.Init(filepath.Join(dir, "keys"), "TL1"); err != nil {
		t.Fatal(err)
	}
	os.MkdirAll(filepath.Join(dir, "keys", "approvers"), 0o755)
	st, err := sequencer.LoadStation(filepath.Join(dir, "brx200-station.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	seq, err := sequencer.LoadSequence(filepath.Join(dir, "brx200-sequence.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	return st, seq
}

// A crash between the ledger commit and the document leaves a certified run with
// no document; the next start republishes it byte-identical to what the station
// would have published.
func TestRepairRepublishesByteIdentical(t *testing.T) {
	dir := t.TempDir()
	st, seq := demoFiles(t, dir)
	eng, err := sequencer.Open(context.Background(), sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test"})
	if err != nil {
		t.Fatal(err)
	}
	defer eng.Close()
	rec := eng.Run(context.Background(), "BRX-00001")
	key, err := signing.Load(st.SigningKey)
	if err != nil {
		t.Fatal(err)
	}
	issue := func(name string, crash bool) []byte {
		d := filepath.Join(dir, name)
		os.MkdirAll(filepath.Join(d, "certificates"), 0o755)
		led, err := ledger.Open(context.Background(), filepath.Join(d, "ledger.db"))
		if err != nil {
			t.Fatal(err)
		}
		defer led.Close()
		is := &issuing.Issuer{Ledger: led, Key: key, Station: st, Sequence: seq, CertDir: filepath.Join(d, "certificates")}
		if crash {
			// The first half of record: the commit, then the process dies.
			_, err = led.RecordRunWith(context.Background(), rec, ledger.RecordOptions{Prefix: st.CertificatePrefix,
				Sign: func(number, runID, sha string) (string, []byte, error) {
					return key.ID(), key.Sign(signing.RecordMessage(number, runID, sha)), nil
				}})
			if err != nil {
				t.Fatal(err)
			}
			if n, err := is.Repair(context.Background()); err != nil || n != 1 {
				t.Fatalf("repair: %d %v", n, err)
			}
		} else if _, err := is.Record(context.Background(), rec); err != nil {
			t.Fatal(err)
		}
		pdfs, _ := filepath.Glob(filepath.Join(d, "certificates", "*.pdf"))
		if len(pdfs) != 1 {
			t.Fatalf("%d PDFs", len(pdfs))
		}
		b, _ := os.ReadFile(pdfs[0])
		return b
	}
	if !bytes.Equal(issue("normal", false), issue("crashed", true)) {
		t.Fatal("the republished certificate differs from the one the station would have issued")
	}
	// The certificate and its seal carry the run's chain link, as the ledger has it.
	{
		pdfs, _ := filepath.Glob(filepath.Join(dir, "normal", "certificates", "*.pdf"))
		pdf, _ := os.ReadFile(pdfs[0])
		seal, err := signing.ReadSeal(pdfs[0] + ".seal")
		if err != nil {
			t.Fatal(err)
		}
		led, err := ledger.Open(context.Background(), filepath.Join(dir, "normal", "ledger.db"))
		if err != nil {
			t.Fatal(err)
		}
		_, meta, err := led.RunByCertificate(context.Background(), seal.Number)
		led.Close()
		if err != nil || len(meta.ChainHash) != 64 || meta.ChainSeq != 1 || certificate.ChainLink(pdf) != meta.ChainHash ||
			seal.ChainHash != meta.ChainHash || seal.ChainSeq != meta.ChainSeq {
			t.Fatalf("chain link: ledger %+v (%v), PDF %q, seal %q %d", meta, err, certificate.ChainLink(pdf), seal.ChainHash, seal.ChainSeq)
		}
	}
	// A PDF and seal lost after the document was recorded are written again at the
	// next start, identical.
	pdfs, _ := filepath.Glob(filepath.Join(dir, "normal", "certificates", "*.pdf"))
	want, _ := os.ReadFile(pdfs[0])
	os.Remove(pdfs[0])
	os.Remove(pdfs[0] + ".seal")
	led, err := ledger.Open(context.Background(), filepath.Join(dir, "normal", "ledger.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer led.Close()
	is := &issuing.Issuer{Ledger: led, Key: key, Station: st, Sequence: seq, CertDir: filepath.Join(dir, "normal", "certificates")}
	if n, err := is.Repair(context.Background()); err != nil || n != 1 {
		t.Fatalf("repair of lost files: %d %v", n, err)
	}
	got, _ := os.ReadFile(pdfs[0])
	if !bytes.Equal(got, want) {
		t.Error("the rewritten PDF differs")
	}
	if _, err := os.Stat(pdfs[0] + ".seal"); err != nil {
		t.Error("the seal was not rewritten")
	}
}

// A whole batch run again is one refusal: the first few serials in full, the rest
// counted and named, and every one still an ErrTestedBefore.
func TestTestedBeforeMessageStaysShort(t *testing.T) {
	var tb issuing.TestedBefore
	for _, sn := range []string{"BRX-00001", "BRX-00002", "BRX-00003", "BRX-00004", "BRX-00005"} {
		tb = append(tb, &issuing.TestedBeforeError{Serial: sn, InBatch: true})
	}
	msg := tb.Error()
	if n := strings.Count(msg, "give --retest"); n != 3 {
		t.Errorf("%d refusals spelled out, want 3:\n%s", n, msg)
	}
	if !strings.Contains(msg, "… and 2 more serial(s) tested before: BRX-00004, BRX-00005") {
		t.Errorf("the rest are not counted and named:\n%s", msg)
	}
	if !errors.Is(tb, issuing.ErrTestedBefore) {
		t.Error("not an ErrTestedBefore")
	}
}

// issuedUnit runs one demo unit in a fresh folder and issues its certificate
// through an Issuer without a key, on a ledger closed when the test ends.
func issuedUnit(t *testing.T) (dir string, led *ledger.Ledger, is *issuing.Issuer, rec *sequencer.Record, cert string) {
	t.Helper()
	ctx := context.Background()
	dir = t.TempDir()
	st, seq := demoFiles(t, dir)
	eng, err := sequencer.Open(ctx, sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test"})
	if err != nil {
		t.Fatal(err)
	}
	defer eng.Close()
	rec = eng.Run(ctx, "BRX-00001")
	led, err = ledger.Open(ctx, filepath.Join(dir, "ledger.db"))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { led.Close() })
	is = &issuing.Issuer{Ledger: led, Station: st, Sequence: seq, CertDir: dir}
	if cert, err = is.Record(ctx, rec); err != nil || cert == "" {
		t.Fatalf("record: %q, %v", cert, err)
	}
	return dir, led, is, rec, cert
}

// Reprint writes nothing when the certificate rendered again is not the document
// the ledger recorded, and refuses a number no run has.
func TestReprintRefusesOtherBytes(t *testing.T) {
	ctx := context.Background()
	dir, led, _, rec, cert := issuedUnit(t)
	out := filepath.Join(dir, "copy.pdf")
	r, err := issuing.Reprint(ctx, led, cert, out)
	if err != nil || r.Seal != "" {
		t.Fatalf("reprint of an unsigned certificate: %+v, %v", r, err)
	}
	// A later document with other bytes: the reprint no longer matches it.
	other := strings.Repeat("ab", 32)
	if err := led.AddSignedDocument(ctx, ledger.Document{RunID: rec.RunID, Number: cert, Path: out, SHA256: other, Size: r.Size}); err != nil {
		t.Fatal(err)
	}
	os.Remove(out)
	if _, err := issuing.Reprint(ctx, led, cert, out); !errors.Is(err, issuing.ErrNotIdentical) {
		t.Errorf("reprint against another document hash: %v, want ErrNotIdentical", err)
	}
	if _, err := os.Stat(out); !errors.Is(err, fs.ErrNotExist) {
		t.Errorf("a refused reprint wrote %s", out)
	}
	if _, err := issuing.Reprint(ctx, led, "TL1-999999", out); !errors.Is(err, ledger.ErrNotFound) {
		t.Errorf("unknown number: %v, want ErrNotFound", err)
	}
}

// A certificate issued before certificates printed their run's chain link is
// rendered again in that earlier layout, byte for byte.
func TestReprintEarlierLayout(t *testing.T) {
	ctx := context.Background()
	dir, led, is, rec, cert := issuedUnit(t)
	stored, meta, err := led.RunByCertificate(ctx, cert)
	if err != nil || meta.ChainHash == "" {
		t.Fatalf("run: %+v %v", meta, err)
	}
	// The same certificate as a station issued it before chain links were printed.
	opt := certificate.Options{Number: cert, RecordSHA256: meta.RecordSHA256}
	for _, in := range stored.Instruments {
		if in.Role == "dut" && in.Identity.Maker != "0" {
			opt.Maker = in.Identity.Maker
		}
	}
	var old bytes.Buffer
	if err := certificate.Write(&old, stored, opt); err != nil {
		t.Fatal(err)
	}
	sum := sha256.Sum256(old.Bytes())
	out := filepath.Join(dir, "earlier.pdf")
	if err := led.AddSignedDocument(ctx, ledger.Document{RunID: rec.RunID, Number: cert, Path: out, SHA256: hex.EncodeToString(sum[:]), Size: int64(old.Len())}); err != nil {
		t.Fatal(err)
	}
	if _, err := issuing.Reprint(ctx, led, cert, out); err != nil {
		t.Fatalf("reprint in the earlier layout: %v", err)
	}
	got, err := os.ReadFile(out)
	if err != nil || !bytes.Equal(got, old.Bytes()) {
		t.Errorf("the reprint is not the certificate issued in the earlier layout (%d bytes, want %d): %v", len(got), old.Len(), err)
	}

	// Lost again, the start-up repair writes it back the same way, and records no
	// new document.
	os.Remove(out)
	before, _ := led.DocumentsFor(ctx, cert)
	if n, err := is.Repair(ctx); err != nil || n != 1 {
		t.Fatalf("repair: %d, %v; want 1 certificate written back", n, err)
	}
	after, _ := led.DocumentsFor(ctx, cert)
	if got, err := os.ReadFile(out); err != nil || !bytes.Equal(got, old.Bytes()) || len(after) != len(before) {
		t.Errorf("repair of a lost earlier-layout certificate: %d bytes (want %d), documents %d → %d: %v", len(got), old.Len(), len(before), len(after), err)
	}
}
