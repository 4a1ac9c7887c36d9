package signing

import (
	"bytes"
	"crypto/ed25519"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"strings"
	"time"

	"trimline/reports/internal/atomicfile"
)

// codeAlphabet is the alphabet of verification codes: Crockford's base32, the
// digits and the capital letters without I, L, O and U. No two of its characters
// look alike, and ParseVerificationCode reads the letters people confuse with its
// digits (O for 0, I and L for 1) as those digits.
const codeAlphabet = "0123456789ABCDEFGHJKMNPQRSTVWXYZ"

// VerificationCode is a short code a person can read aloud or type, derived from a
// record signature: the first 60 bits of SHA-256("trimline-code-v1\n" ‖ recordSig)
// as 12 characters of codeAlphabet (5 bits each, most significant first) in three
// groups of four, e.g. "K7QF-2M9D-XA4P". The same signature always gives the same
// code. It names a signature; it proves nothing by itself (60 bits are easy to
// read, not hard to forge); the signatures in the seal are the proof. An empty
// signature gives "".
func VerificationCode(recordSig []byte) string {
	if len(recordSig) == 0 {
		return ""
	}
	h := sha256.New()
	h.Write([]byte("trimline-code-v1\n"))
	h.Write(recordSig)
	v := binary.BigEndian.Uint64(h.Sum(nil)[:8]) >> 4 // 60 bits
	var b [14]byte
	n := 0
	for i := 11; i >= 0; i-- {
		b[n] = codeAlphabet[(v>>(5*uint(i)))&31]
		n++
		if i == 8 || i == 4 {
			b[n] = '-'
			n++
		}
	}
	return string(b[:])
}

// ParseVerificationCode reads a code as a person typed it: case, spaces and
// hyphens do not matter, and O, I and L are read as 0, 1 and 1. It returns the
// code in the form VerificationCode gives, or an error when it is not 12
// characters of the alphabet.
func ParseVerificationCode(s string) (string, error) {
	var b []byte
	for _, r := range strings.ToUpper(s) {
		switch {
		case r == '-' || r == ' ' || r == '\t':
			continue
		case r == 'O':
			r = '0'
		case r == 'I' || r == 'L':
			r = '1'
		}
		if r > 127 || !strings.ContainsRune(codeAlphabet, r) {
			return "", fmt.Errorf("signing: verification code %q: %q is not a code character", s, r)
		}
		b = append(b, byte(r))
	}
	if len(b) != 12 {
		return "", fmt.Errorf("signing: verification code %q: %d characters, want 12", s, len(b))
	}
	return string(b[0:4]) + "-" + string(b[4:8]) + "-" + string(b[8:12]), nil
}

// SealFormat is the Format of every seal this package writes.
const SealFormat = "trimline-seal-v1"

// Seal is the detached signature file written next to a PDF (NAME.pdf.seal,
// JSON): what an auditor needs, with the station's public key, to tell whether a
// PDF is the one issued. RecordSignature covers RecordMessage(Number, RunID,
// RecordSHA256) and PDFSignature covers PDFMessage(Number, pdf). Signed is
// when the station sealed it; it is informational and covered by neither
// signature. Signatures are base64 in the JSON.
type Seal struct {
	Format           string    `json:"format"` // SealFormat
	Number           string    `json:"number"` // certificate number
	RunID            string    `json:"run_id"`
	Serial           string    `json:"serial"`        // for the reader; bound through RecordSHA256, not signed on its own
	RecordSHA256     string    `json:"record_sha256"` // lowercase hex
	PDFSHA256        string    `json:"pdf_sha256"`    // lowercase hex
	KeyID            string    `json:"key_id"`        // ID of the signing key
	RecordSignature  []byte    `json:"record_signature"`
	PDFSignature     []byte    `json:"pdf_signature"`
	VerificationCode string    `json:"verification_code"` // VerificationCode(RecordSignature)
	Signed           time.Time `json:"signed"`
	// ChainHash and ChainSeq are the run's link in its station's hash chain in
	// the ledger (chain_hash, chain_seq), as the PDF prints them; covered by the
	// PDF signature through the PDF, not signed on their own. Absent from seals
	// made before certificates carried their chain link.
	ChainHash string `json:"chain_hash,omitempty"`
	ChainSeq  int64  `json:"chain_seq,omitempty"`
}

// Errors of Seal.VerifyPDF, for errors.Is.
var (
	ErrWrongKey     = errors.New("seal was made with another key")
	ErrPDFAltered   = errors.New("PDF differs from the one sealed")
	ErrBadSignature = errors.New("signature does not verify")
	ErrBadSeal      = errors.New("seal is not consistent")
)

// VerifyPDF checks pdf against the seal with the station's public key: the seal's
// key ID is pub's, the PDF's SHA-256 is the sealed one, both signatures verify and
// the verification code is the record signature's. It returns nil when all hold,
// else an error that wraps ErrWrongKey, ErrPDFAltered, ErrBadSignature or
// ErrBadSeal. It cannot check RecordSHA256 against the record itself; that takes
// the ledger.
func (s Seal) VerifyPDF(pub ed25519.PublicKey, pdf []byte) error {
	if s.Format != SealFormat {
		return fmt.Errorf("signing: %w: format %q, want %q", ErrBadSeal, s.Format, SealFormat)
	}
	if len(pub) != ed25519.PublicKeySize {
		return fmt.Errorf("signing: %w: public key has %d bytes", ErrWrongKey, len(pub))
	}
	if id := KeyID(pub); s.KeyID != id {
		return fmt.Errorf("signing: %w: seal names key %s, given %s", ErrWrongKey, s.KeyID, id)
	}
	sum := sha256.Sum256(pdf)
	if got := hex.EncodeToString(sum[:]); got != s.PDFSHA256 {
		return fmt.Errorf("signing: %w: its SHA-256 is %s, the seal's %s", ErrPDFAltered, got, s.PDFSHA256)
	}
	if !Verify(pub, PDFMessage(s.Number, pdf), s.PDFSignature) {
		return fmt.Errorf("signing: %w: PDF signature of certificate %s", ErrBadSignature, s.Number)
	}
	if !Verify(pub, RecordMessage(s.Number, s.RunID, s.RecordSHA256), s.RecordSignature) {
		return fmt.Errorf("signing: %w: record signature of certificate %s", ErrBadSignature, s.Number)
	}
	if c := VerificationCode(s.RecordSignature); s.VerificationCode != c {
		return fmt.Errorf("signing: %w: verification code %s, the signature's is %s", ErrBadSeal, s.VerificationCode, c)
	}
	return nil
}

// WriteSeal writes s to path as indented JSON, atomically: to a temporary file in
// the same directory, synced, then renamed over path (mode 0644). An empty Format
// is written as SealFormat; another Format is an error.
func WriteSeal(path string, s Seal) error {
	if s.Format == "" {
		s.Format = SealFormat
	}
	if s.Format != SealFormat {
		return fmt.Errorf("signing: seal format %q, want %q", s.Format, SealFormat)
	}
	data, err := json.MarshalIndent(s, "", "  ")
	if err != nil {
		return fmt.Errorf("signing: %w", err)
	}
	data = append(data, '\n')
	if err := atomicfile.Write(path, data, 0o644); err != nil {
		return fmt.Errorf("signing: %w", err)
	}
	return nil
}

// ReadSeal reads a seal written by WriteSeal. It refuses unknown fields, trailing
// data and any Format but SealFormat.
func ReadSeal(path string) (Seal, error) {
	f, err := os.Open(path)
	if err != nil {
		return Seal{}, fmt.Errorf("signing: %w", err)
	}
	defer f.Close()
	data, err := io.ReadAll(io.LimitReader(f, 1<<20))
	if err != nil {
		return Seal{}, fmt.Errorf("signing: read %s: %w", path, err)
	}
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	var s Seal
	if err := dec.Decode(&s); err != nil {
		return Seal{}, fmt.Errorf("signing: seal %s: %w", path, err)
	}
	if err := dec.Decode(new(json.RawMessage)); err != io.EOF {
		return Seal{}, fmt.Errorf("signing: seal %s: data after the JSON object", path)
	}
	if s.Format != SealFormat {
		return Seal{}, fmt.Errorf("signing: seal %s: format %q, want %q", path, s.Format, SealFormat)
	}
	return s, nil
}
