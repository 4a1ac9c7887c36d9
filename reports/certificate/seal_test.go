package certificate_test

import (
	"bytes"
	"crypto/ed25519"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"trimline/reports/certificate"
	"trimline/reports/signing"
	"trimline/sequencer"
)

// testKey is a fixed station key, so that signed certificates are reproducible.
func testKey() *signing.Key {
	priv := ed25519.NewKeyFromSeed(bytes.Repeat([]byte{0x42}, ed25519.SeedSize))
	return &signing.Key{Private: priv, Public: priv.Public().(ed25519.PublicKey)}
}

// signedOptions seals rec the way a station would: hash the record, sign the
// record message, derive the code.
func signedOptions(t testing.TB, rec *sequencer.Record, k *signing.Key) (certificate.Options, signing.Seal) {
	t.Helper()
	// A stand-in for the hash of the record as the ledger keeps it.
	sum := sha256.Sum256([]byte(rec.RunID + "\n" + rec.Serial + "\n" + rec.Finished.Format(time.RFC3339Nano)))
	s := signing.Seal{Number: opt.Number, RunID: rec.RunID, Serial: rec.Serial, RecordSHA256: hex.EncodeToString(sum[:]),
		KeyID: k.ID(), Signed: time.Date(2026, 3, 14, 9, 45, 0, 0, time.UTC)}
	s.RecordSignature = k.Sign(signing.RecordMessage(s.Number, s.RunID, s.RecordSHA256))
	s.VerificationCode = signing.VerificationCode(s.RecordSignature)
	o := opt
	o.RecordSHA256, o.VerificationCode, o.KeyID = s.RecordSHA256, s.VerificationCode, s.KeyID
	o.Signer = &certificate.Manifestation{Name: "Dana Whitfield", Meaning: "released", Signed: time.Date(2026, 3, 14, 9, 44, 12, 0, time.UTC)}
	return o, s
}

func TestSealedText(t *testing.T) {
	rec := sampleRecord()
	o, s := signedOptions(t, rec, testKey())
	text := pdfText(t, render(t, rec, o))
	requireText(t, text,
		"Verification code", s.VerificationCode,
		"Record SHA-256", s.RecordSHA256,
		"Signed by station key "+s.KeyID,
		"trimline audit verify FILE.pdf",
		"Signature", "Dana Whitfield — released — 2026-03-14 09:44:12 UTC",
	)
	if strings.Contains(text, "Unsigned") || strings.Contains(text, "unsigned") {
		t.Error("a sealed certificate says unsigned")
	}
	pages := strings.Count(text, "\f")
	if n := strings.Count(flat(text), "verification code "+s.VerificationCode); n != pages {
		t.Errorf("the footer shows the verification code on %d of %d pages", n, pages)
	}
	// The code and the hash are on page 1.
	page1 := flat(strings.SplitN(text, "\f", 2)[0])
	for _, want := range []string{s.VerificationCode, s.RecordSHA256, "Dana Whitfield"} {
		if !strings.Contains(page1, want) {
			t.Errorf("page 1 lacks %q", want)
		}
	}

	// A manifestation that lacks its meaning or time says so.
	o.Signer = &certificate.Manifestation{Name: "Dana Whitfield"}
	requireText(t, pdfText(t, render(t, rec, o)), "Dana Whitfield — meaning not stated — time not recorded")

	// Without a signer no signature line; the seal is still shown.
	o.Signer = nil
	text = pdfText(t, render(t, rec, o))
	requireText(t, text, s.VerificationCode, "Signed by station key")
	if strings.Contains(text, "Dana Whitfield") || strings.Contains(text, "released") {
		t.Error("a manifestation is printed without a signer")
	}
}

func TestUnsignedText(t *testing.T) {
	text := pdfText(t, render(t, sampleRecord(), opt))
	requireText(t, text, "Unsigned", "This certificate carries no station seal", "· unsigned")
	for _, bad := range []string{"Verification code", "verification code", "Signed by station key", "Record SHA-256", "audit verify"} {
		if strings.Contains(text, bad) {
			t.Errorf("an unsigned certificate shows %q", bad)
		}
	}
	// A record hash alone is shown, still unsigned.
	o := opt
	o.RecordSHA256 = strings.Repeat("0f", 32)
	requireText(t, pdfText(t, render(t, sampleRecord(), o)), "Unsigned", "Record SHA-256", o.RecordSHA256)
}

func TestSealedIsDeterministic(t *testing.T) {
	o, _ := signedOptions(t, sampleRecord(), testKey())
	a := render(t, sampleRecord(), o)
	if !bytes.Equal(a, render(t, sampleRecord(), o)) {
		t.Fatal("two renders of the same sealed certificate differ")
	}
	if bytes.Equal(a, render(t, sampleRecord(), opt)) {
		t.Fatal("sealed and unsigned certificates are the same bytes")
	}
	for name, change := range map[string]func(*certificate.Options){
		"code": func(o *certificate.Options) { o.VerificationCode = "0000-0000-0000" },
		"key":  func(o *certificate.Options) { o.KeyID = "ed25519:0000000000000000" },
		"hash": func(o *certificate.Options) { o.RecordSHA256 = strings.Repeat("0", 64) },
		"signer": func(o *certificate.Options) {
			o.Signer = &certificate.Manifestation{Name: "Other", Meaning: "released", Signed: o.Signer.Signed}
		},
		"meaning": func(o *certificate.Options) {
			o.Signer = &certificate.Manifestation{Name: o.Signer.Name, Meaning: "approved", Signed: o.Signer.Signed}
		},
		"time": func(o *certificate.Options) {
			o.Signer = &certificate.Manifestation{Name: o.Signer.Name, Meaning: o.Signer.Meaning}
		},
	} {
		o2 := o
		change(&o2)
		if bytes.Equal(a, render(t, sampleRecord(), o2)) {
			t.Errorf("a different %s gave the same bytes", name)
		}
	}
}

func TestSealedFitsThreePages(t *testing.T) {
	for name, rec := range map[string]*sequencer.Record{"fail": sampleRecord(), "review": reviewRecord(), "old": oldRecord(), "pass": passRecord()} {
		o, _ := signedOptions(t, rec, testKey())
		if pages := strings.Count(pdfText(t, render(t, rec, o)), "\f"); pages > 3 {
			t.Errorf("%s record: %d pages, want at most 3", name, pages)
		}
	}
}

func TestMetadata(t *testing.T) {
	rec := sampleRecord()
	pdf := render(t, rec, opt)
	n, r, ok := certificate.Metadata(pdf)
	if !ok || n != opt.Number || r != rec.RunID {
		t.Fatalf("Metadata = %q, %q, %v; want %q, %q", n, r, ok, opt.Number, rec.RunID)
	}
	if !bytes.Contains(pdf, []byte("/Keywords (trimline-certificate TL1-000042 run "+rec.RunID+")")) {
		t.Error("keywords are not written as plain text")
	}
	if bin, err := exec.LookPath("pdfinfo"); err == nil {
		p := filepath.Join(t.TempDir(), "c.pdf")
		os.WriteFile(p, pdf, 0o644)
		out, err := exec.Command(bin, p).Output()
		if err != nil || !strings.Contains(string(out), "trimline-certificate TL1-000042 run "+rec.RunID) {
			t.Errorf("pdfinfo does not show the keywords: %v\n%s", err, out)
		}
	}

	// Odd numbers and run ids survive; no number at all is still found.
	for _, tc := range []struct{ number, run string }{
		{"TL1 000042 (copy)", `run\id%`},
		{"", ""},
		{"Nº 42", "µ-run"},
		{"run", "run"},
	} {
		r := sampleRecord()
		r.RunID = tc.run
		n, id, ok := certificate.Metadata(render(t, r, certificate.Options{Number: tc.number}))
		if !ok || n != tc.number || id != tc.run {
			t.Errorf("Metadata(%q, %q) = %q, %q, %v", tc.number, tc.run, n, id, ok)
		}
	}

	// An incremental update that appends a new information dictionary wins.
	upd := append(bytes.Clone(pdf), "\n9 0 obj\n<<\n/Keywords (trimline-certificate TL1-000099 run other)\n>>\nendobj\n"...)
	if n, r, ok := certificate.Metadata(upd); !ok || n != "TL1-000099" || r != "other" {
		t.Errorf("after an update: %q, %q, %v", n, r, ok)
	}
	for name, b := range map[string][]byte{
		"nil":       nil,
		"not a PDF": []byte("hello"),
		"malformed": []byte("/Keywords (trimline-certificate TL1-1 %Z run x)"),
		"no run":    []byte("/Keywords (trimline-certificate TL1-1)"),
		"open":      []byte("/Keywords (trimline-certificate TL1-1 run x"),
	} {
		if n, r, ok := certificate.Metadata(b); ok {
			t.Errorf("%s: found %q, %q", name, n, r)
		}
	}
}

// A certificate with its chain link prints it in the seal block, with the run's
// position in its station's chain, and carries it in the keywords, where
// ChainLink reads it back; Metadata reads the number and run as before. Identical
// options give identical bytes; without a link there is none to read.
func TestChainLink(t *testing.T) {
	rec := sampleRecord()
	o, _ := signedOptions(t, rec, testKey())
	o.ChainLink, o.ChainSeq = strings.Repeat("c0ffee", 10)+"abcd", 17
	pdf := render(t, rec, o)
	if got := certificate.ChainLink(pdf); got != o.ChainLink {
		t.Errorf("ChainLink = %q, want %q", got, o.ChainLink)
	}
	if n, r, ok := certificate.Metadata(pdf); !ok || n != o.Number || r != rec.RunID {
		t.Errorf("Metadata with a chain link = %q, %q, %v", n, r, ok)
	}
	if !bytes.Equal(pdf, render(t, rec, o)) {
		t.Error("the same record and options give different bytes")
	}
	o.ChainLink, o.ChainSeq = "", 0
	if got := certificate.ChainLink(render(t, rec, o)); got != "" {
		t.Errorf("ChainLink of a certificate without one = %q", got)
	}
	if text := pdfText(t, pdf); !strings.Contains(text, "Chain link") || !strings.Contains(text, o.ChainLink) ||
		!strings.Contains(text, "run 17 of station "+rec.Station+"'s chain in the ledger") {
		t.Errorf("the seal block does not show the chain link:\n%s", text)
	}
}

// Issue requirement: any one-byte change to a sealed PDF makes its signature fail.
func TestPDFTamper(t *testing.T) {
	k := testKey()
	rec := sampleRecord()
	o, s := signedOptions(t, rec, k)
	pdf := render(t, rec, o)
	sig := k.Sign(signing.PDFMessage(o.Number, pdf))
	if !signing.Verify(k.Public, signing.PDFMessage(o.Number, pdf), sig) {
		t.Fatal("the signature of the unmodified PDF does not verify")
	}
	sum := sha256.Sum256(pdf)
	s.PDFSHA256, s.PDFSignature, s.Format = hex.EncodeToString(sum[:]), sig, signing.SealFormat
	if err := s.VerifyPDF(k.Public, pdf); err != nil {
		t.Fatalf("the seal of the unmodified PDF does not verify: %v", err)
	}

	rng := rand.New(rand.NewPCG(20260314, 42))
	for i := range 100 {
		bad := bytes.Clone(pdf)
		at := rng.IntN(len(bad))
		bad[at] ^= byte(1 + rng.IntN(255)) // never 0: the byte always changes
		if bad[at] == pdf[at] {
			t.Fatalf("change %d did not change byte %d", i, at)
		}
		if signing.Verify(k.Public, signing.PDFMessage(o.Number, bad), sig) {
			t.Errorf("change %d (byte %d: %#02x → %#02x) still verifies", i, at, pdf[at], bad[at])
		}
		if err := s.VerifyPDF(k.Public, bad); !errors.Is(err, signing.ErrPDFAltered) {
			t.Errorf("change %d (byte %d): VerifyPDF %v, want ErrPDFAltered", i, at, err)
		}
	}
	// The unmodified PDF still verifies: nothing above changed it.
	if !signing.Verify(k.Public, signing.PDFMessage(o.Number, pdf), sig) {
		t.Fatal("the unmodified PDF no longer verifies")
	}
}

// TestWriteSealedSample writes a sealed certificate and its seal for a person to
// look at when CERTIFICATE_SAMPLES names a directory.
func TestWriteSealedSample(t *testing.T) {
	dir := os.Getenv("CERTIFICATE_SAMPLES")
	if dir == "" {
		t.Skip("set CERTIFICATE_SAMPLES to a directory to write a sealed sample")
	}
	k := testKey()
	for name, rec := range map[string]*sequencer.Record{"fail": sampleRecord(), "pass": passRecord()} {
		o, s := signedOptions(t, rec, k)
		path := filepath.Join(dir, "cert-sealed-"+name+".pdf")
		if err := certificate.WriteFile(path, rec, o); err != nil {
			t.Fatal(err)
		}
		pdf, _ := os.ReadFile(path)
		sum := sha256.Sum256(pdf)
		s.PDFSHA256, s.PDFSignature = hex.EncodeToString(sum[:]), k.Sign(signing.PDFMessage(o.Number, pdf))
		if err := signing.WriteSeal(path+".seal", s); err != nil {
			t.Fatal(err)
		}
	}
}
