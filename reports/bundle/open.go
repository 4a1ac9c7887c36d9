package bundle

import (
	"archive/zip"
	"bytes"
	"context"
	"crypto/ed25519"
	"crypto/sha256"
	"crypto/x509"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"encoding/pem"
	"errors"
	"fmt"
	"io"
	"strings"

	"trimline/instruments/files"
	"trimline/reports/ledger"
	"trimline/reports/signing"
	"trimline/sequencer"
)

// Bounds on what Open reads, against archives that inflate without end (a 1.3 MB
// zip bomb once took 2.3 GB before it was refused) and archives of countless
// members. A run's record is at most about 20 MB (sequencer.MaxSweepReadings);
// each bound is well above what Export writes for it. Within them Open holds at
// most maxTotalSize of members and the record decoded from one of them; a bomb
// is refused before it inflates (BenchmarkOpenZipBomb measures both).
const (
	maxArchiveSize   = 128 << 20 // bytes of the archive file
	maxTotalSize     = 96 << 20  // bytes of all members, inflated
	maxRecordSize    = 40 << 20  // record.json and readings.csv, each, inflated
	maxPDFSize       = 16 << 20  // certificate.pdf, inflated
	maxSmallSize     = 1 << 20   // manifest.json, the seal, a public key, inflated
	maxMembers       = 64        // members of the archive
	maxDirectorySize = 32 << 10  // bytes of the zip's central directory
)

// memberLimit returns the most bytes the member name may inflate to.
func memberLimit(name string) int64 {
	switch {
	case name == recordName || name == readingsName:
		return maxRecordSize
	case name == pdfName:
		return maxPDFSize
	case strings.HasPrefix(name, filesDir):
		return files.MaxFileSize // a station, sequence or limit file must load
	}
	return maxSmallSize
}

// Bundle is a bundle read and checked by Open.
type Bundle struct {
	Manifest   Manifest
	Record     *sequencer.Record // decoded from RecordJSON
	RecordJSON []byte            // record.json, the record's canonical JSON
	// Files holds the files in force the bundle carries (files/...), keyed by the
	// lowercase hex SHA-256 of their content, as ledger.RecordOptions.Files.
	Files     map[string][]byte
	PDF, Seal []byte            // certificate.pdf and certificate.pdf.seal; nil when absent
	PublicKey ed25519.PublicKey // from keys/...; nil when absent
	// Verified says what Open checked and found good, in words, in the order
	// checked; Notes what it could not check (no public key, a file the bundle
	// does not carry, ...).
	Verified, Notes []string
	// ArchiveSHA256 is the lowercase hex SHA-256 of the whole archive; Source is
	// what Import records as the import's source, "trimline-bundle-v1 sha256:" and
	// ArchiveSHA256. Set Source to say more (where the file came from) before Import.
	ArchiveSHA256, Source string
}

// Open reads a bundle of size bytes from r and checks it:
//
//   - the archive holds manifest.json and exactly the members it lists, each once,
//     with its SHA-256 and size, and nothing but the members a bundle has;
//   - manifest.json is in the exact form Export writes (no byte differs), of Format;
//   - record.json has the manifest's record_sha256 and is a canonical record
//     (ledger.DecodeCanonical) whose run id, serial, station and Finished time are
//     the manifest's, with a certificate number exactly if it is PASS, FAIL or REVIEW;
//   - readings.csv is the record's readings, byte for byte;
//   - every files/ member is a file the record names, under its name, with the
//     SHA-256 the record gives;
//   - a public key (keys/...) has the manifest's key id, and the record signature
//     verifies with it over signing.RecordMessage(number, run id, record SHA-256);
//   - a seal is of this run (number, run id, serial, record SHA-256, key id,
//     record signature, verification code) and of the PDF when there is one; with
//     the public key and the PDF, both its signatures verify (signing.Seal.VerifyPDF).
//
// Every failed check is ErrBadBundle, wrapped with the reason; an error reading r
// is returned as it is (wrapped). Bundle.Verified and Bundle.Notes say what was
// and was not checked. The public key checked is the bundle's own: see VerifyWith.
func Open(r io.ReaderAt, size int64) (*Bundle, error) {
	if size > maxArchiveSize {
		return nil, bad("archive of %d bytes, more than the %d MiB a bundle may have", size, maxArchiveSize>>20)
	}
	if err := checkDirectory(r, size); err != nil {
		return nil, bad("%v", err)
	}
	h := sha256.New()
	if _, err := io.Copy(h, io.NewSectionReader(r, 0, size)); err != nil {
		return nil, fmt.Errorf("bundle: read: %w", err)
	}
	zr, err := zip.NewReader(r, size)
	if err != nil {
		return nil, bad("not a zip archive: %v", err)
	}
	b := &Bundle{ArchiveSHA256: hex.EncodeToString(h.Sum(nil)), Files: map[string][]byte{}}
	b.Source = Format + " sha256:" + b.ArchiveSHA256

	if len(zr.File) > maxMembers {
		return nil, bad("%d members, more than the %d a bundle may have", len(zr.File), maxMembers)
	}
	members := map[string][]byte{}
	var total int64
	for _, f := range zr.File {
		name := f.Name
		if _, dup := members[name]; dup {
			return nil, bad("member %s is in the archive twice", name)
		}
		if !knownName(name) {
			return nil, bad("member %q is not one a bundle has", name)
		}
		// The declared size is checked first, the bytes inflated after: a header
		// may lie, so the read itself stops one byte past the bound.
		limit := memberLimit(name)
		if f.UncompressedSize64 > uint64(limit) {
			return nil, bad("member %s declares %d bytes, more than the %d a bundle's %s may have", name, f.UncompressedSize64, limit, name)
		}
		if left := maxTotalSize - total; f.UncompressedSize64 > uint64(left) {
			return nil, bad("members of more than %d MiB in all", maxTotalSize>>20)
		}
		data, err := readMember(f, min(limit, maxTotalSize-total))
		if err != nil {
			return nil, bad("member %s: %v", name, err)
		}
		total += int64(len(data))
		members[name] = data
	}

	// The manifest and the members it lists.
	man, ok := members[manifestName]
	if !ok {
		return nil, bad("no %s", manifestName)
	}
	m, err := decodeManifest(man)
	if err != nil {
		return nil, bad("%s: %v", manifestName, err)
	}
	b.Manifest = m
	listed := map[string]bool{manifestName: true}
	for _, fe := range m.Files {
		if listed[fe.Path] {
			return nil, bad("%s lists %s twice", manifestName, fe.Path)
		}
		listed[fe.Path] = true
		data, ok := members[fe.Path]
		if !ok {
			return nil, bad("%s lists %s, which is not in the archive", manifestName, fe.Path)
		}
		if int64(len(data)) != fe.Size {
			return nil, bad("%s: %d bytes, the manifest says %d", fe.Path, len(data), fe.Size)
		}
		if got := sha256Hex(data); got != fe.SHA256 {
			return nil, bad("%s: SHA-256 %s, the manifest says %s", fe.Path, got, fe.SHA256)
		}
	}
	for _, f := range zr.File {
		if !listed[f.Name] {
			return nil, bad("member %s is not listed in %s", f.Name, manifestName)
		}
	}
	b.verified("%s (%s) lists the %d other members, each present with its SHA-256 and size, and nothing else is in the archive",
		manifestName, m.Format, len(m.Files))

	// The record.
	doc, ok := members[recordName]
	if !ok {
		return nil, bad("no %s", recordName)
	}
	if got := sha256Hex(doc); got != m.RecordSHA256 {
		return nil, bad("%s has SHA-256 %s, the manifest's record_sha256 is %s", recordName, got, m.RecordSHA256)
	}
	rec, err := ledger.DecodeCanonical(doc)
	if err != nil {
		return nil, bad("%s: %v", recordName, err)
	}
	for _, f := range []struct{ name, man, rec string }{
		{"run_id", m.RunID, rec.RunID}, {"serial", m.Serial, rec.Serial}, {"station", m.Station, rec.Station},
	} {
		if f.man != f.rec {
			return nil, bad("%s has %s %q, the record %q", manifestName, f.name, f.man, f.rec)
		}
	}
	if !m.Created.Equal(rec.Finished) {
		return nil, bad("%s has created %s, the record finished %s", manifestName, m.Created, rec.Finished)
	}
	if certified(rec.Verdict) != (m.Number != "") {
		return nil, bad("%s has certificate number %q for a %s record", manifestName, m.Number, rec.Verdict)
	}
	b.Record, b.RecordJSON = rec, doc
	b.verified("%s is the canonical record of run %s (serial %s, station %q, %s), SHA-256 %s as the manifest says",
		recordName, rec.RunID, rec.Serial, rec.Station, rec.Verdict, m.RecordSHA256)

	csvData, ok := members[readingsName]
	if !ok {
		return nil, bad("no %s", readingsName)
	}
	if !bytes.Equal(csvData, readingsCSV(rec)) {
		return nil, bad("%s is not the record's readings", readingsName)
	}
	b.verified("%s is the record's %d readings", readingsName, countReadings(rec))

	// The files in force.
	want := map[string]sequencer.FileRef{}
	for _, f := range rec.Files {
		p := filePath(f)
		if prev, ok := want[p]; ok && !strings.EqualFold(prev.SHA256, f.SHA256) {
			return nil, bad("the record names two contents for %s", p)
		}
		want[p] = f
	}
	for _, fe := range m.Files {
		if !strings.HasPrefix(fe.Path, filesDir) {
			continue
		}
		f, ok := want[fe.Path]
		if !ok {
			return nil, bad("%s is not a file the record names", fe.Path)
		}
		if sum := strings.ToLower(f.SHA256); fe.SHA256 != sum {
			return nil, bad("%s has SHA-256 %s, the record names %s for %s %q", fe.Path, fe.SHA256, sum, f.Kind, f.Name)
		}
		b.Files[fe.SHA256] = members[fe.Path]
	}
	for _, f := range rec.Files {
		if _, ok := members[filePath(f)]; ok {
			b.verified("file %s %q: SHA-256 %s, as the record names it", f.Kind, f.Name, strings.ToLower(f.SHA256))
		} else {
			b.note("file %s %q (SHA-256 %s) is not in the bundle", f.Kind, f.Name, strings.ToLower(f.SHA256))
		}
	}

	// The signature and the key.
	if (m.KeyID == "") != (len(m.RecordSignature) == 0) {
		return nil, bad("%s has key_id %q and a record signature of %d bytes", manifestName, m.KeyID, len(m.RecordSignature))
	}
	for _, fe := range m.Files {
		if !strings.HasPrefix(fe.Path, keysDir) {
			continue
		}
		if m.KeyID == "" || fe.Path != keyPath(m.KeyID) {
			return nil, bad("%s is not the key of the run's key id %q", fe.Path, m.KeyID)
		}
		pub, err := decodePublic(members[fe.Path])
		if err != nil {
			return nil, bad("%s: %v", fe.Path, err)
		}
		if id := signing.KeyID(pub); id != m.KeyID {
			return nil, bad("%s is key %s, the run's is %s", fe.Path, id, m.KeyID)
		}
		b.PublicKey = pub
	}
	switch {
	case b.PublicKey != nil:
		if !signing.Verify(b.PublicKey, signing.RecordMessage(m.Number, m.RunID, m.RecordSHA256), m.RecordSignature) {
			return nil, bad("the record signature does not verify with key %s", m.KeyID)
		}
		b.verified("the record signature verifies with key %s (the bundle's own) over certificate %q, run %s, record SHA-256 %s",
			m.KeyID, m.Number, m.RunID, m.RecordSHA256)
		b.note("the public key is the bundle's own, so this proves nothing by itself: check that key id %s is one you trust", m.KeyID)
	case m.KeyID != "":
		b.note("the record is signed by key %s, but the bundle carries no public key: the signature is not verified", m.KeyID)
	default:
		b.note("the run is not signed")
	}

	// The certificate and its seal.
	if pdf, ok := members[pdfName]; ok {
		if m.Number == "" {
			return nil, bad("%s for a run without a certificate", pdfName)
		}
		b.PDF = pdf
	}
	if data, ok := members[sealName]; ok {
		seal, err := decodeSeal(data)
		if err != nil {
			return nil, bad("%s: %v", sealName, err)
		}
		if err := checkSeal(seal, m, b.PDF, b.PublicKey); err != nil {
			return nil, bad("%s: %v", sealName, err)
		}
		b.Seal = data
		switch {
		case b.PDF != nil && b.PublicKey != nil:
			b.verified("%s seals %s with key %s: the PDF's SHA-256, its PDF signature and its record signature verify", sealName, pdfName, m.KeyID)
		case b.PDF != nil:
			b.verified("%s is the run's seal and names the SHA-256 of %s", sealName, pdfName)
			b.note("%s: the PDF signature is not verified (no public key)", sealName)
		default:
			b.verified("%s is the run's seal", sealName)
			b.note("%s: the bundle carries no PDF; the seal's PDF signature is not verified", sealName)
		}
	} else if b.PDF != nil {
		b.note("%s comes without its seal: nothing in the bundle vouches for it", pdfName)
	}
	return b, nil
}

// VerifyWith checks the bundle's signatures with pub, a key the caller trusts:
// its ID is the manifest's key id, the record signature verifies and, when the
// bundle has a seal and a PDF, the seal verifies the PDF. Errors wrap
// signing.ErrWrongKey for another key, ErrBadBundle for a signature that does not
// verify or an unsigned run.
func (b *Bundle) VerifyWith(pub ed25519.PublicKey) error {
	m := b.Manifest
	if m.KeyID == "" {
		return bad("the run is not signed")
	}
	if id := signing.KeyID(pub); len(pub) != ed25519.PublicKeySize || id != m.KeyID {
		return fmt.Errorf("bundle: %w: the run is signed by key %s, given %s", signing.ErrWrongKey, m.KeyID, id)
	}
	if !signing.Verify(pub, signing.RecordMessage(m.Number, m.RunID, m.RecordSHA256), m.RecordSignature) {
		return bad("the record signature does not verify with key %s", m.KeyID)
	}
	if b.Seal != nil {
		seal, err := decodeSeal(b.Seal)
		if err != nil {
			return bad("%s: %v", sealName, err)
		}
		if err := checkSeal(seal, m, b.PDF, pub); err != nil {
			return bad("%s: %v", sealName, err)
		}
	}
	return nil
}

// Import stores the run of b in led as an imported run (ledger.ImportRun): the
// record JSON with its SHA-256, number and signature, the files in force, the PDF,
// the seal and the public key (in the ledger's blobs), with b.Source as its source
// and an audit trail entry "import" by actor. It re-checks what it stores (the
// record's SHA-256, and the record signature when b has a public key; ErrBadBundle
// otherwise). Importing the same bundle again writes nothing and returns
// ledger.ErrAlreadyImported (wrapped). The run enters neither a hash chain of led
// nor its certificate sequence.
//
// Errors: ErrBadBundle (wrapped) for a nil or inconsistent b; ledger.ErrInvalid for
// an empty actor; ledger.ErrDuplicateRun for a run that is led's own;
// ledger.ErrAlreadyImported for a run imported already with the same contents;
// ledger.ErrImportConflict for a run imported with other contents.
func Import(ctx context.Context, led *ledger.Ledger, b *Bundle, actor string) error {
	if b == nil || b.Record == nil {
		return bad("nothing to import (use Open)")
	}
	m := b.Manifest
	if got := sha256Hex(b.RecordJSON); got != m.RecordSHA256 {
		return bad("the record JSON has SHA-256 %s, the manifest's record_sha256 is %s", got, m.RecordSHA256)
	}
	var pubPEM []byte
	if b.PublicKey != nil {
		if id := signing.KeyID(b.PublicKey); id != m.KeyID {
			return bad("the public key is %s, the run's key %q", id, m.KeyID)
		}
		if !signing.Verify(b.PublicKey, signing.RecordMessage(m.Number, m.RunID, m.RecordSHA256), m.RecordSignature) {
			return bad("the record signature does not verify with key %s", m.KeyID)
		}
		pubPEM = encodePublic(b.PublicKey)
	}
	source := b.Source
	if source == "" {
		source = Format
	}
	err := led.ImportRun(ctx, ledger.ImportedRun{
		RunID: m.RunID, Number: m.Number, Station: m.Station, Serial: m.Serial,
		RecordJSON: b.RecordJSON, RecordSHA256: m.RecordSHA256, KeyID: m.KeyID, Signature: m.RecordSignature,
		ImportedBy: actor, Source: source,
		Files: b.Files, PDF: b.PDF, Seal: b.Seal, PublicKey: pubPEM,
	})
	if err != nil {
		return fmt.Errorf("bundle: import: %w", err)
	}
	return nil
}

func bad(format string, args ...any) error {
	return fmt.Errorf("%w: %s", ErrBadBundle, fmt.Sprintf(format, args...))
}

func (b *Bundle) verified(format string, args ...any) {
	b.Verified = append(b.Verified, fmt.Sprintf(format, args...))
}

func (b *Bundle) note(format string, args ...any) {
	b.Notes = append(b.Notes, fmt.Sprintf(format, args...))
}

// knownName reports whether name is a member a bundle may have.
func knownName(name string) bool {
	switch name {
	case manifestName, recordName, readingsName, pdfName, sealName:
		return true
	}
	for _, dir := range []string{filesDir, keysDir} {
		if rest, ok := strings.CutPrefix(name, dir); ok {
			return rest != "" && rest == safeName(rest) && (dir != keysDir || strings.HasSuffix(rest, ".pub"))
		}
	}
	return false
}

// readMember inflates one member, at most limit bytes of it whatever its header
// says (archive/zip checks the CRC-32 and the declared size at the end). The
// buffer starts at the declared size, itself at most limit, so that an honest
// member is read without growing it.
func readMember(f *zip.File, limit int64) ([]byte, error) {
	rc, err := f.Open()
	if err != nil {
		return nil, err
	}
	defer rc.Close()
	buf := bytes.NewBuffer(make([]byte, 0, min(int64(f.UncompressedSize64), limit)+bytes.MinRead))
	if _, err := buf.ReadFrom(io.LimitReader(rc, limit+1)); err != nil {
		return nil, err
	}
	if int64(buf.Len()) > limit {
		return nil, fmt.Errorf("inflates to more than %d bytes", limit)
	}
	return buf.Bytes(), nil
}

// checkDirectory finds the end record of the zip's central directory as
// archive/zip does and refuses a zip64 archive, more than maxMembers entries, a
// directory larger than maxDirectorySize and one that does not end where the end
// record starts. archive/zip reads directory entries up to the end of the file and
// checks their count only modulo 65536, so without this a small archive could
// make it build a million entries before Open sees the first. An archive without
// an end record is left to archive/zip to refuse.
func checkDirectory(r io.ReaderAt, size int64) error {
	const endLen = 22 // the end record without its comment
	for _, n := range []int64{1024, 65 * 1024} {
		n = min(n, size)
		buf := make([]byte, n)
		if _, err := r.ReadAt(buf, size-n); err != nil && err != io.EOF {
			return err
		}
		p := -1
		for i := len(buf) - endLen; i >= 0; i-- { // as archive/zip's findSignatureInBlock
			if buf[i] == 'P' && buf[i+1] == 'K' && buf[i+2] == 5 && buf[i+3] == 6 {
				if comment := int(binary.LittleEndian.Uint16(buf[i+20:])); i+endLen+comment <= len(buf) {
					p = i
				}
				break
			}
		}
		if p < 0 {
			if n == size {
				return nil
			}
			continue
		}
		end := buf[p:]
		records := binary.LittleEndian.Uint16(end[10:])
		dirSize := binary.LittleEndian.Uint32(end[12:])
		dirOffset := binary.LittleEndian.Uint32(end[16:])
		switch {
		case records == 0xffff || dirSize >= 0xffff || dirOffset == 0xffffffff:
			return errors.New("a zip64 archive or a central directory of 64 KiB or more; a bundle needs neither")
		case records > maxMembers:
			return fmt.Errorf("%d members, more than the %d a bundle may have", records, maxMembers)
		case dirSize > maxDirectorySize:
			return fmt.Errorf("a central directory of %d bytes, more than %d", dirSize, maxDirectorySize)
		case int64(dirOffset)+int64(dirSize) != size-n+int64(p):
			return errors.New("the central directory does not end where its end record starts")
		}
		return nil
	}
	return nil
}

// decodeStrict decodes one JSON value into v: no unknown fields, nothing after it.
func decodeStrict(data []byte, v any) error {
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if err := dec.Decode(v); err != nil {
		return err
	}
	if err := dec.Decode(new(json.RawMessage)); err != io.EOF {
		return errors.New("data after the JSON object")
	}
	return nil
}

// decodeManifest decodes manifest.json and checks that it is exactly as
// encodeManifest writes it, and of Format.
func decodeManifest(data []byte) (Manifest, error) {
	var m Manifest
	if err := decodeStrict(data, &m); err != nil {
		return Manifest{}, err
	}
	if m.Format != Format {
		return Manifest{}, fmt.Errorf("format %q, want %q", m.Format, Format)
	}
	again, err := encodeManifest(m)
	if err != nil {
		return Manifest{}, err
	}
	if !bytes.Equal(again, data) {
		return Manifest{}, errors.New("not in the form Export writes (bytes changed)")
	}
	return m, nil
}

// decodeSeal decodes a seal as signing.ReadSeal does, and checks that it is exactly
// as encodeSeal writes it.
func decodeSeal(data []byte) (signing.Seal, error) {
	var s signing.Seal
	if err := decodeStrict(data, &s); err != nil {
		return signing.Seal{}, err
	}
	again, err := encodeSeal(s)
	if err != nil {
		return signing.Seal{}, err
	}
	if !bytes.Equal(again, data) {
		return signing.Seal{}, errors.New("not in the form Export writes (bytes changed)")
	}
	return s, nil
}

// decodePublic reads a public key written by encodePublic, exactly.
func decodePublic(data []byte) (ed25519.PublicKey, error) {
	block, _ := pem.Decode(data)
	if block == nil || block.Type != "PUBLIC KEY" {
		return nil, errors.New("not a PEM PUBLIC KEY block")
	}
	k, err := x509.ParsePKIXPublicKey(block.Bytes)
	if err != nil {
		return nil, err
	}
	pub, ok := k.(ed25519.PublicKey)
	if !ok {
		return nil, fmt.Errorf("a %T, not an Ed25519 public key", k)
	}
	if !bytes.Equal(encodePublic(pub), data) {
		return nil, errors.New("not in the form Export writes (bytes changed)")
	}
	return pub, nil
}

func certified(v sequencer.Verdict) bool {
	return v == sequencer.Pass || v == sequencer.Fail || v == sequencer.Review
}

func countReadings(rec *sequencer.Record) int {
	n := 0
	for _, s := range rec.Sweeps {
		for _, p := range s.Points {
			n += len(p.Readings)
		}
	}
	return n
}
