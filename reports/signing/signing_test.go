package signing_test

import (
	"bytes"
	"crypto/ed25519"
	"encoding/hex"
	"encoding/pem"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"runtime"
	"strings"
	"testing"
	"time"

	"trimline/reports/signing"
)

func newKey(t *testing.T) (*signing.Key, string, string) {
	t.Helper()
	dir := filepath.Join(t.TempDir(), "keys")
	priv, pub, err := signing.Init(dir, "station")
	if err != nil {
		t.Fatalf("Init: %v", err)
	}
	k, err := signing.Load(priv)
	if err != nil {
		t.Fatalf("Load: %v", err)
	}
	return k, priv, pub
}

func TestInitLoadRoundTrip(t *testing.T) {
	k, privPath, pubPath := newKey(t)
	dir := filepath.Dir(privPath)
	if filepath.Base(privPath) != "station.key" || filepath.Base(pubPath) != "station.pub" {
		t.Errorf("paths %s, %s", privPath, pubPath)
	}
	if runtime.GOOS != "windows" {
		for path, want := range map[string]os.FileMode{dir: 0o700, privPath: 0o600, pubPath: 0o644} {
			fi, err := os.Stat(path)
			if err != nil || fi.Mode().Perm() != want {
				t.Errorf("%s: mode %v, %v; want %v", path, fi.Mode().Perm(), err, want)
			}
		}
	}
	data, _ := os.ReadFile(privPath)
	if b, _ := pem.Decode(data); b == nil || b.Type != "TRIMLINE ED25519 PRIVATE KEY" || len(b.Bytes) != 32 {
		t.Errorf("private key file is not a 32-byte seed in a TRIMLINE ED25519 PRIVATE KEY block:\n%s", data)
	}
	data, _ = os.ReadFile(pubPath)
	if b, _ := pem.Decode(data); b == nil || b.Type != "PUBLIC KEY" {
		t.Errorf("public key file is not a PUBLIC KEY block:\n%s", data)
	}

	pub, err := signing.LoadPublic(pubPath)
	if err != nil {
		t.Fatalf("LoadPublic: %v", err)
	}
	if !bytes.Equal(pub, k.Public) || !bytes.Equal(k.Private.Public().(ed25519.PublicKey), k.Public) {
		t.Error("public key differs from the private key's")
	}
	if !regexp.MustCompile(`^ed25519:[0-9a-f]{16}$`).MatchString(k.ID()) || k.ID() != signing.KeyID(pub) {
		t.Errorf("ID %q, KeyID %q", k.ID(), signing.KeyID(pub))
	}
	msg := []byte("trimline")
	if !signing.Verify(pub, msg, k.Sign(msg)) {
		t.Error("a signature by the loaded key does not verify with the loaded public key")
	}

	// A second key in the same directory; LoadPublicDir finds both by ID.
	_, pub2Path, err := signing.Init(dir, "spare")
	if err != nil {
		t.Fatal(err)
	}
	pub2, _ := signing.LoadPublic(pub2Path)
	os.WriteFile(filepath.Join(dir, "notes.txt"), []byte("not a key"), 0o644)
	keys, err := signing.LoadPublicDir(dir)
	if err != nil {
		t.Fatalf("LoadPublicDir: %v", err)
	}
	if len(keys) != 2 || !bytes.Equal(keys[k.ID()], pub) || !bytes.Equal(keys[signing.KeyID(pub2)], pub2) {
		t.Errorf("LoadPublicDir gave %d keys: %v", len(keys), keys)
	}
	os.WriteFile(filepath.Join(dir, "broken.pub"), []byte("garbage"), 0o644)
	if _, err := signing.LoadPublicDir(dir); err == nil || !strings.Contains(err.Error(), "broken.pub") {
		t.Errorf("LoadPublicDir with a broken .pub: %v", err)
	}
}

func TestInitRefusesToOverwrite(t *testing.T) {
	_, privPath, pubPath := newKey(t)
	dir := filepath.Dir(privPath)
	before, _ := os.ReadFile(privPath)
	if _, _, err := signing.Init(dir, "station"); err == nil || !strings.Contains(err.Error(), "already exists") {
		t.Fatalf("Init over an existing key: %v", err)
	}
	if after, _ := os.ReadFile(privPath); !bytes.Equal(before, after) {
		t.Fatal("the existing private key was changed")
	}

	// Only the private key exists: refused, and no public key is written.
	os.Remove(pubPath)
	if _, _, err := signing.Init(dir, "station"); err == nil {
		t.Fatal("Init over an existing private key succeeded")
	}
	if _, err := os.Stat(pubPath); err == nil {
		t.Error("a public key was written beside the old private key")
	}
	// Only the public key exists: refused, and no private key is written.
	d2 := t.TempDir()
	os.WriteFile(filepath.Join(d2, "s.pub"), []byte("old"), 0o644)
	if _, _, err := signing.Init(d2, "s"); err == nil {
		t.Fatal("Init over an existing public key succeeded")
	}
	if _, err := os.Stat(filepath.Join(d2, "s.key")); err == nil {
		t.Error("a private key was written beside the old public key")
	}
	for _, bad := range []string{"", "../x", "a/b", ".hidden"} {
		if _, _, err := signing.Init(d2, bad); err == nil {
			t.Errorf("Init with name %q succeeded", bad)
		}
	}
}

func TestLoadRefusesOpenPermissions(t *testing.T) {
	if runtime.GOOS == "windows" {
		t.Skip("file modes are not checked on Windows")
	}
	_, privPath, _ := newKey(t)
	for _, mode := range []os.FileMode{0o644, 0o640, 0o604, 0o620} {
		if err := os.Chmod(privPath, mode); err != nil {
			t.Fatal(err)
		}
		_, err := signing.Load(privPath)
		if err == nil {
			t.Fatalf("Load of a mode %#o key succeeded", mode)
		}
		if msg := err.Error(); !strings.Contains(msg, fmt.Sprintf("mode %#o", mode)) || !strings.Contains(msg, "chmod 600 "+privPath) {
			t.Errorf("mode %#o: error %q does not name the mode and the fix", mode, msg)
		}
	}
	os.Chmod(privPath, 0o400)
	if _, err := signing.Load(privPath); err != nil {
		t.Errorf("Load of a mode 0400 key: %v", err)
	}
}

func TestLoadRefusesMalformedPEM(t *testing.T) {
	dir := t.TempDir()
	seed := bytes.Repeat([]byte{7}, 32)
	good := pem.EncodeToMemory(&pem.Block{Type: "TRIMLINE ED25519 PRIVATE KEY", Bytes: seed})
	cases := map[string][]byte{
		"empty":       {},
		"not PEM":     []byte("9d61b19deffd5a60ba844af492ec2cc44449c5697b326919703bac031cae7f60\n"),
		"wrong type":  pem.EncodeToMemory(&pem.Block{Type: "PRIVATE KEY", Bytes: seed}),
		"short":       pem.EncodeToMemory(&pem.Block{Type: "TRIMLINE ED25519 PRIVATE KEY", Bytes: seed[:31]}),
		"truncated":   good[:len(good)-20],
		"bad base64":  bytes.Replace(good, []byte("BwcH"), []byte("B!cH"), 1),
		"headers":     pem.EncodeToMemory(&pem.Block{Type: "TRIMLINE ED25519 PRIVATE KEY", Headers: map[string]string{"Proc-Type": "4,ENCRYPTED"}, Bytes: seed}),
		"trailing":    append(append([]byte{}, good...), "junk"...),
		"two blocks":  append(append([]byte{}, good...), good...),
		"bad 64-byte": pem.EncodeToMemory(&pem.Block{Type: "TRIMLINE ED25519 PRIVATE KEY", Bytes: append(append([]byte{}, seed...), seed...)}),
	}
	for name, data := range cases {
		p := filepath.Join(dir, "k.key")
		os.Remove(p)
		if err := os.WriteFile(p, data, 0o600); err != nil {
			t.Fatal(err)
		}
		if _, err := signing.Load(p); err == nil {
			t.Errorf("%s: Load succeeded", name)
		}
	}
	p := filepath.Join(dir, "ok.key")
	os.WriteFile(p, good, 0o600)
	k, err := signing.Load(p)
	if err != nil || !bytes.Equal(k.Private.Seed(), seed) {
		t.Fatalf("well-formed key: %v", err)
	}
	// The 64-byte form (seed ‖ public key) is accepted too.
	p64 := filepath.Join(dir, "ok64.key")
	os.WriteFile(p64, pem.EncodeToMemory(&pem.Block{Type: "TRIMLINE ED25519 PRIVATE KEY", Bytes: k.Private}), 0o600)
	if k64, err := signing.Load(p64); err != nil || !bytes.Equal(k64.Public, k.Public) {
		t.Errorf("64-byte key: %v", err)
	}

	pubFile := filepath.Join(dir, "x.pub")
	for name, data := range map[string][]byte{
		"garbage": []byte("garbage"),
		"raw":     pem.EncodeToMemory(&pem.Block{Type: "PUBLIC KEY", Bytes: k.Public}),
		"private": good,
	} {
		os.WriteFile(pubFile, data, 0o644)
		if _, err := signing.LoadPublic(pubFile); err == nil {
			t.Errorf("LoadPublic %s succeeded", name)
		}
	}
}

func TestSignVerify(t *testing.T) {
	k, _, _ := newKey(t)
	other, _, _ := newKey(t)
	msg := []byte("trimline-pdf-v1\nTL1-000042\nabc")
	sig := k.Sign(msg)
	if len(sig) != ed25519.SignatureSize {
		t.Fatalf("signature of %d bytes", len(sig))
	}
	if !signing.Verify(k.Public, msg, sig) {
		t.Fatal("signature does not verify")
	}
	if !bytes.Equal(sig, k.Sign(msg)) {
		t.Error("Ed25519 signatures are deterministic, these differ")
	}
	bad := bytes.Clone(sig)
	bad[10] ^= 1
	for name, ok := range map[string]bool{
		"other message":   signing.Verify(k.Public, []byte("trimline-pdf-v1\nTL1-000043\nabc"), sig),
		"other key":       signing.Verify(other.Public, msg, sig),
		"flipped bit":     signing.Verify(k.Public, msg, bad),
		"short signature": signing.Verify(k.Public, msg, sig[:63]),
		"nil signature":   signing.Verify(k.Public, msg, nil),
		"short key":       signing.Verify(k.Public[:31], msg, sig),
		"nil key":         signing.Verify(nil, msg, sig),
	} {
		if ok {
			t.Errorf("%s: verified", name)
		}
	}
}

// RFC 8032 "Edwards-Curve Digital Signature Algorithm (EdDSA)", §7.1 "Test Vectors
// for Ed25519", TEST 1 (empty message), https://www.rfc-editor.org/rfc/rfc8032#section-7.1
func TestRFC8032Vector1(t *testing.T) {
	unhex := func(s string) []byte {
		b, err := hex.DecodeString(s)
		if err != nil {
			t.Fatal(err)
		}
		return b
	}
	secret := unhex("9d61b19deffd5a60ba844af492ec2cc44449c5697b326919703bac031cae7f60")
	public := unhex("d75a980182b10ab7d54bfed3c964073a0ee172f3daa62325af021a68f707511a")
	want := unhex("e5564300c360ac729086e2cc806e828a84877f1eb8e5d974d873e065224901555fb8821590a33bacc61e39701cf9b46bd25bf5f0595bbe24655141438e7a100b")

	// Through the package's own file format: a key file holding the RFC's secret.
	p := filepath.Join(t.TempDir(), "rfc.key")
	os.WriteFile(p, pem.EncodeToMemory(&pem.Block{Type: "TRIMLINE ED25519 PRIVATE KEY", Bytes: secret}), 0o600)
	k, err := signing.Load(p)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(k.Public, public) {
		t.Fatalf("public key %x, want %x", k.Public, public)
	}
	sig := k.Sign(nil)
	if !bytes.Equal(sig, want) {
		t.Fatalf("signature\n%x, want\n%x", sig, want)
	}
	if !signing.Verify(public, []byte{}, want) {
		t.Fatal("the RFC's signature does not verify")
	}
	if signing.Verify(public, []byte{0}, want) {
		t.Fatal("the RFC's signature verifies another message")
	}
}

func TestVerificationCode(t *testing.T) {
	sig := bytes.Repeat([]byte{0xA5}, 64)
	c := signing.VerificationCode(sig)
	if c != signing.VerificationCode(bytes.Clone(sig)) {
		t.Fatal("not deterministic")
	}
	format := regexp.MustCompile(`^[0-9A-HJKMNP-TV-Z]{4}-[0-9A-HJKMNP-TV-Z]{4}-[0-9A-HJKMNP-TV-Z]{4}$`)
	seen := map[string]bool{}
	k, _, _ := newKey(t)
	for i := range 200 {
		s := k.Sign([]byte{byte(i), byte(i >> 8)})
		code := signing.VerificationCode(s)
		if !format.MatchString(code) || strings.ContainsAny(code, "ILOU") {
			t.Fatalf("code %q does not have the format XXXX-XXXX-XXXX in the alphabet", code)
		}
		seen[code] = true
	}
	if len(seen) != 200 {
		t.Errorf("%d distinct codes of 200 signatures", len(seen))
	}
	sig2 := bytes.Clone(sig)
	sig2[63] ^= 1
	if signing.VerificationCode(sig2) == c {
		t.Error("one bit of the signature does not change the code")
	}
	if signing.VerificationCode(nil) != "" {
		t.Error("an empty signature has a code")
	}
	// Golden value: the derivation is part of the seal format and must not change.
	if c != "7SCB-XNXV-GNG6" {
		t.Errorf("code of 64×0xA5 is %q; the derivation changed", c)
	}

	for in, want := range map[string]string{
		c:                 c,
		"7scbxnxvgng6":    c,
		"7SCB XNXV GNG6":  c,
		" 7scb-XNXV-gng6": c,
		"OOOO-IIII-LLLL":  "0000-1111-1111", // O read as 0, I and L as 1
		"o0i1-l1ZZ-9999":  "0011-11ZZ-9999",
	} {
		got, err := signing.ParseVerificationCode(in)
		if err != nil || got != want {
			t.Errorf("ParseVerificationCode(%q) = %q, %v; want %q", in, got, err, want)
		}
	}
	for _, bad := range []string{"", "6QP6-NYTV-1FM", "6QP6-NYTV-1FMBX", "6QP6-NYTV-1FMU", "6QP6-NYTV-1FM€"} {
		if _, err := signing.ParseVerificationCode(bad); err == nil {
			t.Errorf("ParseVerificationCode(%q) succeeded", bad)
		}
	}
}

func TestMessages(t *testing.T) {
	got := string(signing.PDFMessage("TL1-000001", []byte("abc")))
	want := "trimline-pdf-v1\nTL1-000001\nba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
	if got != want {
		t.Errorf("PDFMessage = %q, want %q", got, want)
	}
	got = string(signing.RecordMessage("TL1-000001", "run7", "00ff"))
	if got != "trimline-record-v1\nTL1-000001\nrun7\n00ff" {
		t.Errorf("RecordMessage = %q", got)
	}
	// A release made at 10:41:55.1200 in UTC+1 is signed at its UTC time, with the
	// fraction's trailing zeros dropped (time.RFC3339Nano).
	at := time.Date(2026, 3, 14, 10, 41, 55, 120000000, time.FixedZone("CET", 3600))
	got = string(signing.ReleaseMessage("00ff", "Dana Whitfield", "approved", at))
	if got != "trimline-release-v1\n00ff\nDana Whitfield\napproved\n2026-03-14T09:41:55.12Z" {
		t.Errorf("ReleaseMessage = %q", got)
	}
	got = string(signing.ReleaseMessage("", "", "", time.Date(2026, 1, 2, 3, 4, 5, 0, time.UTC)))
	if got != "trimline-release-v1\n\n\n\n2026-01-02T03:04:05Z" {
		t.Errorf("ReleaseMessage of empty fields = %q", got)
	}
	got = string(signing.DecisionMessage("00ff", "reject", "Dana Whitfield", "rejected", at))
	if got != "trimline-release-v2\n00ff\nreject\nDana Whitfield\nrejected\n2026-03-14T09:41:55.12Z" {
		t.Errorf("DecisionMessage = %q", got)
	}
	got = string(signing.VoidMessage("TL1-000007", "Dana Whitfield", "wrong limit file", at))
	if got != "trimline-void-v1\nTL1-000007\nDana Whitfield\nwrong limit file\n2026-03-14T09:41:55.12Z" {
		t.Errorf("VoidMessage = %q", got)
	}
	got = string(signing.ReviewMessage("TL1-000022", "accept", "Ada Quillfeather", "offset rechecked", at))
	if got != "trimline-review-v1\nTL1-000022\naccept\nAda Quillfeather\noffset rechecked\n2026-03-14T09:41:55.12Z" {
		t.Errorf("ReviewMessage = %q", got)
	}
}

func sealFor(k *signing.Key, pdf []byte) signing.Seal {
	s := signing.Seal{Number: "TL1-000042", RunID: "01JQ7Z4K9V6T2M8R3X5C0B1N7D", Serial: "BA7-2611-00437",
		RecordSHA256: strings.Repeat("ab", 32), KeyID: k.ID(), Signed: time.Date(2026, 3, 14, 9, 42, 0, 0, time.UTC)}
	s.RecordSignature = k.Sign(signing.RecordMessage(s.Number, s.RunID, s.RecordSHA256))
	s.VerificationCode = signing.VerificationCode(s.RecordSignature)
	s.PDFSHA256 = hexSHA(pdf)
	s.PDFSignature = k.Sign(signing.PDFMessage(s.Number, pdf))
	return s
}

func hexSHA(b []byte) string {
	m := signing.PDFMessage("", b)
	return string(m[bytes.LastIndexByte(m, '\n')+1:])
}

func TestSealRoundTripAndVerify(t *testing.T) {
	k, _, _ := newKey(t)
	pdf := []byte("%PDF-1.3 not really")
	s := sealFor(k, pdf)
	dir := t.TempDir()
	path := filepath.Join(dir, "c.pdf.seal")
	if err := signing.WriteSeal(path, s); err != nil {
		t.Fatalf("WriteSeal: %v", err)
	}
	if entries, _ := os.ReadDir(dir); len(entries) != 1 {
		t.Errorf("WriteSeal left %d files", len(entries))
	}
	got, err := signing.ReadSeal(path)
	if err != nil {
		t.Fatalf("ReadSeal: %v", err)
	}
	s.Format = signing.SealFormat
	if got.Format != s.Format || got.Number != s.Number || got.RunID != s.RunID || got.Serial != s.Serial ||
		got.RecordSHA256 != s.RecordSHA256 || got.PDFSHA256 != s.PDFSHA256 || got.KeyID != s.KeyID ||
		!bytes.Equal(got.RecordSignature, s.RecordSignature) || !bytes.Equal(got.PDFSignature, s.PDFSignature) ||
		got.VerificationCode != s.VerificationCode || !got.Signed.Equal(s.Signed) {
		t.Fatalf("round trip:\n%+v\n%+v", got, s)
	}
	raw, _ := os.ReadFile(path)
	for _, want := range []string{`"format": "trimline-seal-v1"`, `"verification_code": "` + s.VerificationCode, `"key_id": "` + k.ID()} {
		if !bytes.Contains(raw, []byte(want)) {
			t.Errorf("seal file lacks %s:\n%s", want, raw)
		}
	}

	if err := got.VerifyPDF(k.Public, pdf); err != nil {
		t.Fatalf("VerifyPDF of the sealed PDF: %v", err)
	}
	other, _, _ := newKey(t)
	altered := append(bytes.Clone(pdf), ' ')
	forged := got
	forged.RunID = "run-forged"
	recoded := got
	recoded.VerificationCode = "0000-0000-0000"
	for name, tc := range map[string]struct {
		s    signing.Seal
		pub  ed25519.PublicKey
		pdf  []byte
		want error
	}{
		"altered PDF":  {got, k.Public, altered, signing.ErrPDFAltered},
		"other key":    {got, other.Public, pdf, signing.ErrWrongKey},
		"forged field": {forged, k.Public, pdf, signing.ErrBadSignature},
		"wrong code":   {recoded, k.Public, pdf, signing.ErrBadSeal},
	} {
		if err := tc.s.VerifyPDF(tc.pub, tc.pdf); !errors.Is(err, tc.want) {
			t.Errorf("%s: %v, want %v", name, err, tc.want)
		}
	}
	// A seal whose PDF hash was rewritten to the altered PDF's still fails: the
	// signature covers the hash of the PDF it was made for.
	rehashed := got
	rehashed.PDFSHA256 = hexSHA(altered)
	if err := rehashed.VerifyPDF(k.Public, altered); !errors.Is(err, signing.ErrBadSignature) {
		t.Errorf("rehashed seal: %v", err)
	}

	for name, data := range map[string]string{
		"unknown field": `{"format":"trimline-seal-v1","extra":1}`,
		"other format":  `{"format":"trimline-seal-v9"}`,
		"trailing":      `{"format":"trimline-seal-v1"} {}`,
		"not JSON":      `seal`,
	} {
		p := filepath.Join(dir, "bad.seal")
		os.WriteFile(p, []byte(data), 0o644)
		if _, err := signing.ReadSeal(p); err == nil {
			t.Errorf("ReadSeal %s succeeded", name)
		}
	}
	if err := signing.WriteSeal(filepath.Join(dir, "x.seal"), signing.Seal{Format: "other"}); err == nil {
		t.Error("WriteSeal with another format succeeded")
	}
	if err := signing.WriteSeal(filepath.Join(dir, "missing", "x.seal"), s); err == nil {
		t.Error("WriteSeal into a missing directory succeeded")
	}
}
