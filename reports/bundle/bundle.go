// Package bundle packs a unit's full record into one zip archive, and reads such
// an archive back for audit on another machine: what an auditor needs to check and
// replay one run without the station's ledger.
//
// A bundle ("trimline-bundle-v1") holds, in this order:
//
//	manifest.json          what the bundle is (Manifest), JSON, listing every other member
//	record.json            the record's canonical JSON, exactly ledger.Canonical(rec)
//	readings.csv           every reading: sweep,point,reading,stimulus_v,value_v,flag,time
//	files/KIND-NAME        the station, sequence and limit files in force, from the ledger's blobs
//	certificate.pdf        the certificate PDF, when given (Options.PDFPath)
//	certificate.pdf.seal   its seal (signing.Seal, JSON), when given (Options.SealPath)
//	keys/ed25519-HEX.pub   the station's public key (PEM), when given (Options.PublicKeyPath)
//
// What binds it together: the record's SHA-256 is covered by the station's record
// signature (signing.RecordMessage of the certificate number, run id and record
// SHA-256); each file's SHA-256 is named by the record (Record.Files); readings.csv
// is a function of the record; the PDF's SHA-256 and the record signature are in
// the seal, whose PDF signature covers the PDF. The manifest is not signed: Open
// checks each of its fields against what it describes, and that it is in the exact
// form Export writes. With the public key in the bundle the signatures prove only
// that the bundle is consistent with that key; compare the key id with a key you
// trust (Bundle.VerifyWith).
//
// Readings in readings.csv are in the record's order; point and reading are 0-based
// indexes (as in the ledger's readings table); numbers are Go's shortest exact
// form ("NaN", "+Inf" and "-Inf" for the non-finite ones); the flag is "ok",
// "overload" or "nan"; times are RFC 3339 with nanoseconds, in UTC.
//
// Export is deterministic: the same run and options give the same bytes (with the
// same Go release: members are deflated by compress/flate). Every member's
// modification time is the record's Finished time, and so is the manifest's
// created time.
package bundle

import (
	"archive/zip"
	"bytes"
	"context"
	"crypto/ed25519"
	"crypto/sha256"
	"crypto/x509"
	"encoding/csv"
	"encoding/hex"
	"encoding/json"
	"encoding/pem"
	"errors"
	"fmt"
	"io"
	"os"
	"slices"
	"strconv"
	"strings"
	"time"
	"unicode"

	"trimline/reports/ledger"
	"trimline/reports/signing"
	"trimline/sequencer"
)

// Format is the Format of every manifest this package writes.
const Format = "trimline-bundle-v1"

// ErrBadBundle (wrapped, with the reason) is Open's error for an archive that is
// not a consistent trimline bundle, and Import's for a Bundle that is not.
var ErrBadBundle = errors.New("bundle: not a valid trimline bundle")

// Member names.
const (
	manifestName = "manifest.json"
	recordName   = "record.json"
	readingsName = "readings.csv"
	pdfName      = "certificate.pdf"
	sealName     = "certificate.pdf.seal"
	filesDir     = "files/"
	keysDir      = "keys/"
)

// Manifest is manifest.json: what the bundle holds.
type Manifest struct {
	Format       string `json:"format"`        // Format
	Number       string `json:"number"`        // certificate number; "" for a run without one
	RunID        string `json:"run_id"`        // the record's
	Serial       string `json:"serial"`        // the record's
	Station      string `json:"station"`       // the record's
	RecordSHA256 string `json:"record_sha256"` // lowercase hex SHA-256 of record.json
	// KeyID and RecordSignature are the run's signature in the ledger, over
	// signing.RecordMessage(Number, RunID, RecordSHA256); "" and nil (null) when the
	// run is unsigned. The signature is base64 in the JSON.
	KeyID           string      `json:"key_id"`
	RecordSignature []byte      `json:"record_signature"`
	Files           []FileEntry `json:"files"`   // every other member, in archive order
	Created         time.Time   `json:"created"` // the record's Finished time, UTC
}

// FileEntry is one member of the bundle as the manifest lists it.
type FileEntry struct {
	Path   string `json:"path"`
	SHA256 string `json:"sha256"` // lowercase hex
	Size   int64  `json:"size"`   // bytes
}

// Options are the documents Export adds beside the record and its files.
type Options struct {
	// PDFPath is the certificate PDF; it must be one of the documents the ledger
	// recorded for the run's certificate.
	PDFPath string
	// SealPath is the PDF's seal (signing.WriteSeal); it must be the seal of this
	// run (number, run id, serial, record SHA-256, key id and record signature), and
	// of the PDF when PDFPath is given.
	SealPath string
	// PublicKeyPath is the station's public key (signing.Init's NAME.pub); its ID
	// must be the run's key id, and Export checks the signatures with it.
	PublicKeyPath string
}

type member struct {
	name string
	data []byte
}

// Export writes the run numberOrRunID (a certificate number, else a run id) of led
// to w as a bundle (see the package documentation) and returns its manifest. It
// checks what it writes: the record's canonical JSON against the ledger's
// record_sha256, each file's content against the record's SHA-256 (the ledger's
// Blob does), and the documents of opt against the run (Options); with a public
// key, the record signature and the seal's signatures. A file whose content the
// ledger does not have (a run recorded without RecordOptions.Files) is left out;
// Open notes it.
//
// Errors: ledger.ErrNotFound (wrapped) for an unknown number or run id; errors of
// the ledger, of reading opt's files and of writing w; and errors that say which
// check failed. On error, w may hold part of an archive.
func Export(ctx context.Context, led *ledger.Ledger, numberOrRunID string, w io.Writer, opt Options) (Manifest, error) {
	m, members, err := build(ctx, led, numberOrRunID, opt)
	if err != nil {
		return Manifest{}, fmt.Errorf("bundle: export %s: %w", numberOrRunID, err)
	}
	if err := writeZip(w, m, members); err != nil {
		return Manifest{}, fmt.Errorf("bundle: export %s: %w", numberOrRunID, err)
	}
	return m, nil
}

// build collects the members of the bundle of a run and makes its manifest.
func build(ctx context.Context, led *ledger.Ledger, id string, opt Options) (Manifest, []member, error) {
	rec, meta, err := led.RunByCertificate(ctx, id)
	if errors.Is(err, ledger.ErrNotFound) {
		rec, meta, err = led.RunByID(ctx, id)
	}
	if err != nil {
		return Manifest{}, nil, err
	}
	m := Manifest{Format: Format, Number: meta.Certificate, RunID: rec.RunID, Serial: rec.Serial, Station: rec.Station,
		RecordSHA256: meta.RecordSHA256, KeyID: meta.KeyID, RecordSignature: meta.Signature, Created: rec.Finished.UTC()}

	doc, err := ledger.Canonical(rec)
	if err != nil {
		return Manifest{}, nil, err
	}
	if got := sha256Hex(doc); got != meta.RecordSHA256 {
		return Manifest{}, nil, fmt.Errorf("the record's canonical JSON has SHA-256 %s, the ledger's record_sha256 is %s", got, meta.RecordSHA256)
	}
	members := []member{{recordName, doc}, {readingsName, readingsCSV(rec)}}

	paths := map[string]string{} // member path -> SHA-256
	for _, f := range rec.Files {
		p, sum := filePath(f), strings.ToLower(f.SHA256)
		if prev, ok := paths[p]; ok {
			if prev == sum {
				continue
			}
			return Manifest{}, nil, fmt.Errorf("files %s %q: two contents (%s, %s) for one member %s", f.Kind, f.Name, prev, sum, p)
		}
		data, err := led.Blob(ctx, sum)
		if errors.Is(err, ledger.ErrNotFound) || errors.Is(err, ledger.ErrInvalid) {
			continue // the ledger does not have its content
		}
		if err != nil {
			return Manifest{}, nil, fmt.Errorf("file %s %q: %w", f.Kind, f.Name, err)
		}
		if got := sha256Hex(data); got != sum {
			return Manifest{}, nil, fmt.Errorf("file %s %q: content has SHA-256 %s, the record names %s", f.Kind, f.Name, got, sum)
		}
		paths[p] = sum
		members = append(members, member{p, data})
	}

	var pub ed25519.PublicKey
	if opt.PublicKeyPath != "" {
		if pub, err = signing.LoadPublic(opt.PublicKeyPath); err != nil {
			return Manifest{}, nil, err
		}
		if id := signing.KeyID(pub); id != meta.KeyID {
			if meta.KeyID == "" {
				return Manifest{}, nil, fmt.Errorf("public key %s: the run is not signed", id)
			}
			return Manifest{}, nil, fmt.Errorf("public key %s is not the run's key %s", id, meta.KeyID)
		}
		if !signing.Verify(pub, signing.RecordMessage(m.Number, m.RunID, m.RecordSHA256), m.RecordSignature) {
			return Manifest{}, nil, fmt.Errorf("the run's record signature does not verify with key %s", meta.KeyID)
		}
	}
	var pdf []byte
	if opt.PDFPath != "" {
		if m.Number == "" {
			return Manifest{}, nil, fmt.Errorf("PDF %s: the run has no certificate", opt.PDFPath)
		}
		if pdf, err = os.ReadFile(opt.PDFPath); err != nil {
			return Manifest{}, nil, err
		}
		docs, err := led.DocumentsFor(ctx, m.Number)
		if err != nil {
			return Manifest{}, nil, err
		}
		sum := sha256Hex(pdf)
		if !slices.ContainsFunc(docs, func(d ledger.Document) bool { return d.SHA256 == sum }) {
			return Manifest{}, nil, fmt.Errorf("PDF %s (SHA-256 %s) is not a document the ledger recorded for %s", opt.PDFPath, sum, m.Number)
		}
		members = append(members, member{pdfName, pdf})
	}
	if opt.SealPath != "" {
		seal, err := signing.ReadSeal(opt.SealPath)
		if err != nil {
			return Manifest{}, nil, err
		}
		if err := checkSeal(seal, m, pdf, pub); err != nil {
			return Manifest{}, nil, fmt.Errorf("seal %s: %w", opt.SealPath, err)
		}
		data, err := encodeSeal(seal)
		if err != nil {
			return Manifest{}, nil, err
		}
		members = append(members, member{sealName, data})
	}
	if pub != nil {
		members = append(members, member{keyPath(m.KeyID), encodePublic(pub)})
	}
	for _, mb := range members {
		m.Files = append(m.Files, FileEntry{Path: mb.name, SHA256: sha256Hex(mb.data), Size: int64(len(mb.data))})
	}
	return m, members, nil
}

// writeZip writes manifest.json and then the members, deflated, each with the
// manifest's Created time as its modification time and mode 0644.
func writeZip(w io.Writer, m Manifest, members []member) error {
	man, err := encodeManifest(m)
	if err != nil {
		return err
	}
	mod := m.Created.UTC().Truncate(time.Second)
	if mod.Year() < 1980 { // the earliest time a zip header can hold
		mod = time.Date(1980, 1, 1, 0, 0, 0, 0, time.UTC)
	}
	zw := zip.NewWriter(w)
	for _, mb := range append([]member{{manifestName, man}}, members...) {
		h := &zip.FileHeader{Name: mb.name, Method: zip.Deflate, Modified: mod}
		h.SetMode(0o644)
		fw, err := zw.CreateHeader(h)
		if err != nil {
			return err
		}
		if _, err := fw.Write(mb.data); err != nil {
			return err
		}
	}
	return zw.Close()
}

// checkSeal checks a seal against the manifest of its run, and, when given, against
// the PDF (its SHA-256) and with the public key (signing.Seal.VerifyPDF).
func checkSeal(s signing.Seal, m Manifest, pdf []byte, pub ed25519.PublicKey) error {
	if s.Format != signing.SealFormat {
		return fmt.Errorf("format %q, want %q", s.Format, signing.SealFormat)
	}
	for _, f := range []struct{ name, seal, run string }{
		{"number", s.Number, m.Number}, {"run_id", s.RunID, m.RunID}, {"serial", s.Serial, m.Serial},
		{"record_sha256", s.RecordSHA256, m.RecordSHA256}, {"key_id", s.KeyID, m.KeyID},
	} {
		if f.seal != f.run {
			return fmt.Errorf("%s is %q, the run's is %q", f.name, f.seal, f.run)
		}
	}
	if !bytes.Equal(s.RecordSignature, m.RecordSignature) {
		return errors.New("its record signature is not the run's")
	}
	if c := signing.VerificationCode(s.RecordSignature); s.VerificationCode != c {
		return fmt.Errorf("verification code %s, the record signature's is %s", s.VerificationCode, c)
	}
	if pdf != nil {
		if sum := sha256Hex(pdf); s.PDFSHA256 != sum {
			return fmt.Errorf("it seals a PDF with SHA-256 %s, the PDF's is %s", s.PDFSHA256, sum)
		}
		if pub != nil {
			if err := s.VerifyPDF(pub, pdf); err != nil {
				return err
			}
		}
	}
	return nil
}

// readingsCSV is readings.csv of rec (see the package documentation).
func readingsCSV(rec *sequencer.Record) []byte {
	var buf bytes.Buffer
	cw := csv.NewWriter(&buf)
	cw.Write([]string{"sweep", "point", "reading", "stimulus_v", "value_v", "flag", "time"})
	for _, sw := range rec.Sweeps {
		for pi, pt := range sw.Points {
			for ri, r := range pt.Readings {
				cw.Write([]string{sw.Name, strconv.Itoa(pi), strconv.Itoa(ri), formatFloat(pt.Stimulus), formatFloat(r.Value),
					r.Flag.String(), r.Time.UTC().Format(time.RFC3339Nano)})
			}
		}
	}
	cw.Flush() // writes to a bytes.Buffer do not fail
	return buf.Bytes()
}

func formatFloat(f float64) string { return strconv.FormatFloat(f, 'g', -1, 64) }

// filePath is the member of a file in force: files/KIND-NAME, with the characters
// that are not safe in a file name on every system replaced by '_'.
func filePath(f sequencer.FileRef) string {
	return filesDir + safeName(f.Kind+"-"+f.Name)
}

// keyPath is the member of the public key of key id: keys/ID.pub with the ':' of
// the id (and anything else not safe in a file name) replaced.
func keyPath(keyID string) string {
	return keysDir + safeName(strings.ReplaceAll(keyID, ":", "-")) + ".pub"
}

func safeName(s string) string {
	s = strings.Map(func(r rune) rune {
		if unicode.IsControl(r) || strings.ContainsRune(`/\:*?"<>|`, r) {
			return '_'
		}
		return r
	}, s)
	if s == "" || s == "." || s == ".." {
		s = "_" + s
	}
	return s
}

// encodeManifest is manifest.json: indented JSON and a final line break.
func encodeManifest(m Manifest) ([]byte, error) {
	b, err := json.MarshalIndent(m, "", "  ")
	if err != nil {
		return nil, err
	}
	return append(b, '\n'), nil
}

// encodeSeal is a seal as signing.WriteSeal writes it.
func encodeSeal(s signing.Seal) ([]byte, error) {
	b, err := json.MarshalIndent(s, "", "  ")
	if err != nil {
		return nil, err
	}
	return append(b, '\n'), nil
}

// encodePublic is a public key as signing.Init writes it: PEM "PUBLIC KEY", PKIX.
func encodePublic(pub ed25519.PublicKey) []byte {
	der, err := x509.MarshalPKIXPublicKey(pub)
	if err != nil {
		panic(err) // an ed25519.PublicKey always marshals
	}
	return pem.EncodeToMemory(&pem.Block{Type: "PUBLIC KEY", Bytes: der})
}

func sha256Hex(b []byte) string {
	s := sha256.Sum256(b)
	return hex.EncodeToString(s[:])
}
