package bundle_test

import (
	"archive/zip"
	"bytes"
	"context"
	"crypto/ed25519"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"

	"trimline/instruments"
	"trimline/limits"
	"trimline/reports/bundle"
	"trimline/reports/ledger"
	"trimline/reports/signing"
	"trimline/sequencer"
)

var ctx = context.Background()

func sha(b []byte) string {
	s := sha256.Sum256(b)
	return hex.EncodeToString(s[:])
}

// files returns the contents of a station, sequence and limits file keyed by their
// SHA-256, and the FileRefs naming them.
func files(tag string) (map[string][]byte, []sequencer.FileRef) {
	out := map[string][]byte{}
	var refs []sequencer.FileRef
	for _, kind := range []string{"station", "sequence", "limits"} {
		data := []byte(fmt.Sprintf("# %s file %s\nid: x\n", kind, tag))
		out[sha(data)] = data
		refs = append(refs, sequencer.FileRef{Kind: kind, Name: kind + "-" + tag + ".yaml", Title: kind, SHA256: sha(data)})
	}
	return out, refs
}

// record builds a small record with times in a non-UTC zone with nanoseconds and
// the non-finite values real runs have (a NaN and an overload reading, a NaN
// residual SD, an infinite dof).
func record(runID, serial string, verdict sequencer.Verdict, refs []sequencer.FileRef) *sequencer.Record {
	zone := time.FixedZone("station", 2*3600)
	start := time.Date(2025, 6, 3, 9, 14, 27, 123456789, zone)
	rec := &sequencer.Record{
		Schema: sequencer.RecordSchema, RunID: runID, Serial: serial, Product: "AMP-10", Revision: "C",
		Station: "EOL-2", Operator: "op17", Software: "trimline test", Started: start, Finished: start.Add(41*time.Second + 7),
		Files: refs,
		Instruments: []sequencer.InstrumentRef{{Role: "meter", Address: "sim://meter", Asset: "A-101", CalDue: "2026-02-28",
			Identity: instruments.Identity{Maker: "SIM", Model: "DMM6", Serial: "0002", Firmware: "2.3"}}},
		IdealGain: 2, IdealOffset: 0.5, FullScale: 10, Coverage: 0.9545,
		Conditions: sequencer.Conditions{AmbientC: 23.1, AmbientSource: "entered"},
		Verdict:    verdict,
	}
	t := start
	for _, name := range []string{"pre-trim", "verify"} {
		sw := sequencer.Sweep{Name: name}
		for p := range 3 {
			pt := sequencer.Point{Stimulus: -2 + 2*float64(p), Valid: 2}
			for r := range 2 {
				t = t.Add(100*time.Millisecond + time.Duration(r))
				pt.Readings = append(pt.Readings, instruments.Reading{Value: 0.5 + 2*pt.Stimulus + 1e-6*float64(r) + 1.0/3e7, Time: t})
			}
			sw.Points = append(sw.Points, pt)
		}
		rec.Sweeps = append(rec.Sweeps, sw)
		rec.Fits = append(rec.Fits, sequencer.FitSummary{Sweep: name, Slope: 2.000013, Intercept: 0.4999871, ResidualSD: 1.7e-6, DOF: 1,
			Residuals: []float64{1e-7, -2e-7, 1e-7}})
	}
	rec.Sweeps[0].Points[1].Readings[0] = instruments.Reading{Value: math.NaN(), Flag: instruments.FlagNaN, Time: rec.Sweeps[0].Points[1].Readings[0].Time}
	rec.Sweeps[0].Points[2].Readings[1] = instruments.Reading{Value: math.Inf(1), Flag: instruments.FlagOverload, Time: rec.Sweeps[0].Points[2].Readings[1].Time}
	rec.Fits[0].ResidualSD = math.NaN()
	rec.Trims = []sequencer.TrimCode{{DAC: "offset", Before: 2048, Code: 2101, Ideal: 2100.62, Readback: 2101, Stored: true}}
	rec.Results = []sequencer.Result{
		{Name: "post_offset", Value: 3.1e-6, Unit: "V", Valid: true, Unc: sequencer.Uncertainty{Std: 1.2e-6, DOF: math.Inf(1), K: 2, Expanded: 2.4e-6, Method: "GUM"}},
	}
	rec.Outcomes = []limits.Outcome{{Name: "offset", Expr: "abs(post_offset) <= 50", Unit: "uV", Uses: []string{"post_offset"},
		Values: map[string]float64{"post_offset": 3.1}, Pass: verdict == sequencer.Pass}}
	switch verdict {
	case sequencer.Fault:
		rec.Reasons = []string{"meter did not answer"}
		rec.Fault = "meter: read: timeout after 2s"
	case sequencer.Fail:
		rec.Reasons = []string{"offset out of limit"}
	}
	return rec
}

// station is a source station: a ledger with one signed, certified run, its
// certificate PDF (recorded as a document) and seal, and the station's key files.
type station struct {
	led                        *ledger.Ledger
	dir                        string
	key                        *signing.Key
	rec                        *sequencer.Record
	files                      map[string][]byte
	number                     string
	pdfPath, sealPath, pubPath string
}

func newStation(t *testing.T) *station {
	t.Helper()
	return newStationWith(t, nil)
}

// newStationWith is newStation whose run is changed by change (when not nil)
// before it is recorded.
func newStationWith(t *testing.T, change func(*sequencer.Record)) *station {
	t.Helper()
	dir := t.TempDir()
	privPath, pubPath, err := signing.Init(filepath.Join(dir, "keys"), "station")
	if err != nil {
		t.Fatal(err)
	}
	key, err := signing.Load(privPath)
	if err != nil {
		t.Fatal(err)
	}
	led, err := ledger.Open(ctx, filepath.Join(dir, "ledger.db"))
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { led.Close() })
	contents, refs := files("a")
	rec := record("run-0001", "SN-17", sequencer.Pass, refs)
	if change != nil {
		change(rec)
	}
	number, err := led.RecordRunWith(ctx, rec, ledger.RecordOptions{Prefix: "TL1", Files: contents,
		Sign: func(number, runID, recordSHA string) (string, []byte, error) {
			return key.ID(), key.Sign(signing.RecordMessage(number, runID, recordSHA)), nil
		}})
	if err != nil {
		t.Fatal(err)
	}
	_, meta, err := led.RunByCertificate(ctx, number)
	if err != nil {
		t.Fatal(err)
	}
	// The certificate: any bytes do; the ledger and the seal only hash them.
	pdf := []byte("%PDF-1.4\n% trimline test certificate " + number + "\n%%EOF\n")
	pdfPath := filepath.Join(dir, number+".pdf")
	if err := os.WriteFile(pdfPath, pdf, 0o644); err != nil {
		t.Fatal(err)
	}
	pdfSig := key.Sign(signing.PDFMessage(number, pdf))
	if err := led.AddSignedDocument(ctx, ledger.Document{RunID: rec.RunID, Number: number, Path: pdfPath, SHA256: sha(pdf),
		Size: int64(len(pdf)), KeyID: key.ID(), Signature: pdfSig}); err != nil {
		t.Fatal(err)
	}
	seal := signing.Seal{Number: number, RunID: rec.RunID, Serial: rec.Serial, RecordSHA256: meta.RecordSHA256, PDFSHA256: sha(pdf),
		KeyID: key.ID(), RecordSignature: meta.Signature, PDFSignature: pdfSig,
		VerificationCode: signing.VerificationCode(meta.Signature), Signed: rec.Finished}
	if err := signing.WriteSeal(pdfPath+".seal", seal); err != nil {
		t.Fatal(err)
	}
	return &station{led: led, dir: dir, key: key, rec: rec, files: contents, number: number,
		pdfPath: pdfPath, sealPath: pdfPath + ".seal", pubPath: pubPath}
}

func (s *station) all() bundle.Options {
	return bundle.Options{PDFPath: s.pdfPath, SealPath: s.sealPath, PublicKeyPath: s.pubPath}
}

func export(t *testing.T, led *ledger.Ledger, id string, opt bundle.Options) ([]byte, bundle.Manifest) {
	t.Helper()
	var buf bytes.Buffer
	m, err := bundle.Export(ctx, led, id, &buf, opt)
	if err != nil {
		t.Fatalf("Export %s: %v", id, err)
	}
	return buf.Bytes(), m
}

func open(data []byte) (*bundle.Bundle, error) {
	return bundle.Open(bytes.NewReader(data), int64(len(data)))
}

// sameRecord fails unless a and b have the same canonical JSON: every field, every
// float bit for bit (NaN as NaN), every time with its instant and offset.
func sameRecord(t *testing.T, want, got *sequencer.Record) {
	t.Helper()
	a, err := ledger.Canonical(want)
	if err != nil {
		t.Fatal(err)
	}
	b, err := ledger.Canonical(got)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(a, b) {
		t.Fatalf("records differ:\n%s\nvs\n%s", a, b)
	}
}

// A bundle of a signed certified run with its PDF, seal and key opens back to the
// same record, files and documents, with the signatures verified.
func TestExportOpen(t *testing.T) {
	s := newStation(t)
	data, m := export(t, s.led, s.number, s.all())
	b, err := open(data)
	if err != nil {
		t.Fatalf("Open: %v", err)
	}
	sameRecord(t, s.rec, b.Record)
	if !b.Record.Sweeps[0].Points[0].Readings[1].Time.Equal(s.rec.Sweeps[0].Points[0].Readings[1].Time) ||
		!math.IsNaN(b.Record.Sweeps[0].Points[1].Readings[0].Value) || !math.IsInf(b.Record.Results[0].Unc.DOF, 1) {
		t.Error("times or non-finite values not kept")
	}
	doc, _ := ledger.Canonical(s.rec)
	if !bytes.Equal(b.RecordJSON, doc) {
		t.Error("record.json is not ledger.Canonical(rec)")
	}
	if len(b.Files) != len(s.files) {
		t.Errorf("%d files, want %d", len(b.Files), len(s.files))
	}
	for k, v := range s.files {
		if !bytes.Equal(b.Files[k], v) {
			t.Errorf("file %s differs", k)
		}
	}
	pdf, _ := os.ReadFile(s.pdfPath)
	seal, _ := os.ReadFile(s.sealPath)
	if !bytes.Equal(b.PDF, pdf) || !bytes.Equal(b.Seal, seal) || !b.PublicKey.Equal(s.key.Public) {
		t.Error("PDF, seal or public key differ")
	}
	_, meta, _ := s.led.RunByCertificate(ctx, s.number)
	if !reflectEqualManifest(m, b.Manifest) || m.Format != bundle.Format || m.Number != s.number || m.RunID != s.rec.RunID ||
		m.Serial != "SN-17" || m.Station != "EOL-2" || m.RecordSHA256 != meta.RecordSHA256 || m.KeyID != s.key.ID() ||
		!bytes.Equal(m.RecordSignature, meta.Signature) || !m.Created.Equal(s.rec.Finished) {
		t.Errorf("manifest %+v", m)
	}
	var paths []string
	for _, f := range m.Files {
		paths = append(paths, f.Path)
	}
	wantPaths := []string{"record.json", "readings.csv", "files/station-station-a.yaml", "files/sequence-sequence-a.yaml",
		"files/limits-limits-a.yaml", "certificate.pdf", "certificate.pdf.seal", "keys/" + strings.ReplaceAll(s.key.ID(), ":", "-") + ".pub"}
	if !slices.Equal(paths, wantPaths) {
		t.Errorf("members %q, want %q", paths, wantPaths)
	}
	for _, want := range []string{"record signature verifies", "seals certificate.pdf", "readings.csv is the record's 12 readings", "file limits"} {
		if !slices.ContainsFunc(b.Verified, func(v string) bool { return strings.Contains(v, want) }) {
			t.Errorf("Verified does not say %q: %q", want, b.Verified)
		}
	}
	if err := b.VerifyWith(s.key.Public); err != nil {
		t.Errorf("VerifyWith the station key: %v", err)
	}
	other, _ := otherKey(t)
	if err := b.VerifyWith(other); !errors.Is(err, signing.ErrWrongKey) {
		t.Errorf("VerifyWith another key: %v, want ErrWrongKey", err)
	}
	t.Logf("bundle: %d bytes; verified:\n  %s\nnotes:\n  %s", len(data), strings.Join(b.Verified, "\n  "), strings.Join(b.Notes, "\n  "))

	// readings.csv, for people.
	csv := string(unzip(t, data)["readings.csv"])
	lines := strings.Split(strings.TrimSuffix(csv, "\n"), "\n")
	if len(lines) != 13 || lines[0] != "sweep,point,reading,stimulus_v,value_v,flag,time" ||
		!strings.HasPrefix(lines[3], "pre-trim,1,0,0,NaN,nan,2025-06-03T07:14:27.") || !strings.Contains(lines[6], ",+Inf,overload,") {
		t.Errorf("readings.csv:\n%s", csv)
	}
}

func reflectEqualManifest(a, b bundle.Manifest) bool {
	ja, _ := json.Marshal(a)
	jb, _ := json.Marshal(b)
	return bytes.Equal(ja, jb)
}

// otherKey makes another station's key and returns its public key and its file.
func otherKey(t *testing.T) (ed25519.PublicKey, []byte) {
	t.Helper()
	_, pubPath, err := signing.Init(t.TempDir(), "other")
	if err != nil {
		t.Fatal(err)
	}
	pub, err := signing.LoadPublic(pubPath)
	if err != nil {
		t.Fatal(err)
	}
	pem, err := os.ReadFile(pubPath)
	if err != nil {
		t.Fatal(err)
	}
	return pub, pem
}

// zipOf reads data as a zip archive.
func zipOf(t *testing.T, data []byte) *zip.Reader {
	t.Helper()
	zr, err := zip.NewReader(bytes.NewReader(data), int64(len(data)))
	if err != nil {
		t.Fatal(err)
	}
	return zr
}

// unzip returns the members of an archive by name.
func unzip(t *testing.T, data []byte) map[string][]byte {
	t.Helper()
	zr := zipOf(t, data)
	out := map[string][]byte{}
	for _, f := range zr.File {
		out[f.Name] = member(t, f)
	}
	return out
}

// member returns the content of one member of an archive.
func member(t *testing.T, f *zip.File) []byte {
	t.Helper()
	rc, err := f.Open()
	if err != nil {
		t.Fatal(err)
	}
	defer rc.Close()
	b, err := io.ReadAll(rc)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// The same run and options give the same bytes: twice, by number and by run id,
// and from the ledger reopened; members in a fixed order, all dated Finished.
func TestExportDeterministic(t *testing.T) {
	s := newStation(t)
	a, _ := export(t, s.led, s.number, s.all())
	b, _ := export(t, s.led, s.number, s.all())
	c, _ := export(t, s.led, s.rec.RunID, s.all())
	led2, err := ledger.Open(ctx, filepath.Join(s.dir, "ledger.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer led2.Close()
	d, _ := export(t, led2, s.number, s.all())
	if !bytes.Equal(a, b) || !bytes.Equal(a, c) || !bytes.Equal(a, d) {
		t.Fatal("exports of the same run differ")
	}
	zr := zipOf(t, a)
	if zr.File[0].Name != "manifest.json" {
		t.Errorf("first member %s", zr.File[0].Name)
	}
	for _, f := range zr.File {
		if !f.Modified.Equal(s.rec.Finished.Truncate(time.Second)) {
			t.Errorf("%s modified %s, want %s", f.Name, f.Modified, s.rec.Finished)
		}
	}
	// Without options: the record, readings and files only.
	e, m := export(t, s.led, s.number, bundle.Options{})
	if len(m.Files) != 5 || bytes.Equal(a, e) {
		t.Errorf("bundle without documents: %d members", len(m.Files))
	}
	bn, err := open(e)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.ContainsFunc(bn.Notes, func(n string) bool { return strings.Contains(n, "no public key") }) {
		t.Errorf("notes %q", bn.Notes)
	}
}

// rebuild writes the archive again with edit applied to each member's content
// (same names, order, method and times).
func rebuild(t *testing.T, data []byte, edit func(name string, content []byte) []byte) []byte {
	t.Helper()
	zr := zipOf(t, data)
	var buf bytes.Buffer
	zw := zip.NewWriter(&buf)
	for _, f := range zr.File {
		content := member(t, f)
		fw, err := zw.CreateHeader(&zip.FileHeader{Name: f.Name, Method: f.Method, Modified: f.Modified})
		if err != nil {
			t.Fatal(err)
		}
		fw.Write(edit(f.Name, content))
	}
	if err := zw.Close(); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

func flip(b []byte, i int) []byte {
	c := slices.Clone(b)
	c[i] ^= 0x01
	return c
}

// A one-byte change to any member, at its start, middle, end and at other places,
// makes Open fail with ErrBadBundle; so do a member added, removed or doubled.
func TestOpenDetectsChanges(t *testing.T) {
	s := newStation(t)
	data, m := export(t, s.led, s.number, s.all())
	if _, err := open(rebuild(t, data, func(_ string, c []byte) []byte { return c })); err != nil {
		t.Fatalf("an unchanged rebuild fails: %v", err)
	}
	members := unzip(t, data)
	changes := 0
	for name, content := range members {
		n := len(content)
		for _, i := range []int{0, 1, n / 3, n / 2, 2 * n / 3, n - 2, n - 1} {
			changed := rebuild(t, data, func(nm string, c []byte) []byte {
				if nm == name {
					return flip(c, i)
				}
				return c
			})
			if _, err := open(changed); !errors.Is(err, bundle.ErrBadBundle) {
				t.Errorf("byte %d of %s changed: Open gives %v, want ErrBadBundle", i, name, err)
			}
			changes++
		}
	}
	// Every byte of the manifest, which no hash covers but its own form and fields.
	man := members["manifest.json"]
	for i := range man {
		changed := rebuild(t, data, func(nm string, c []byte) []byte {
			if nm == "manifest.json" {
				return flip(c, i)
			}
			return c
		})
		if _, err := open(changed); !errors.Is(err, bundle.ErrBadBundle) {
			t.Errorf("manifest byte %d (%q) changed: Open gives %v", i, man[max(0, i-10):min(len(man), i+10)], err)
		}
		changes++
	}
	t.Logf("%d one-byte changes in %d members (%d listed) detected", changes, len(members), len(m.Files))

	// Structural changes.
	for what, arc := range map[string][]byte{
		"member added":   addMember(t, data, "notes.txt", []byte("hello")),
		"listed removed": dropMember(t, data, "readings.csv"),
		"manifest gone":  dropMember(t, data, "manifest.json"),
		"member doubled": addMember(t, data, "record.json", members["record.json"]),
		"not a zip":      []byte("PK\x03\x04 nothing"),
	} {
		if _, err := open(arc); !errors.Is(err, bundle.ErrBadBundle) {
			t.Errorf("%s: Open gives %v, want ErrBadBundle", what, err)
		}
	}
}

func addMember(t *testing.T, data []byte, name string, content []byte) []byte {
	t.Helper()
	zr := zipOf(t, data)
	var buf bytes.Buffer
	zw := zip.NewWriter(&buf)
	for _, f := range zr.File {
		if err := zw.Copy(f); err != nil {
			t.Fatal(err)
		}
	}
	fw, _ := zw.Create(name)
	fw.Write(content)
	zw.Close()
	return buf.Bytes()
}

func dropMember(t *testing.T, data []byte, name string) []byte {
	t.Helper()
	zr := zipOf(t, data)
	var buf bytes.Buffer
	zw := zip.NewWriter(&buf)
	for _, f := range zr.File {
		if f.Name != name {
			if err := zw.Copy(f); err != nil {
				t.Fatal(err)
			}
		}
	}
	zw.Close()
	return buf.Bytes()
}

// A forger who changes a member and writes its new SHA-256 and size into the
// manifest (and the new record SHA-256 for record.json) is caught by what binds
// the member to the signed record.
func TestOpenDetectsConsistentForgery(t *testing.T) {
	s := newStation(t)
	data, _ := export(t, s.led, s.number, s.all())
	members := unzip(t, data)
	replace := func(c []byte, old, new string) []byte {
		if !bytes.Contains(c, []byte(old)) {
			t.Fatalf("%q not found", old)
		}
		return bytes.Replace(c, []byte(old), []byte(new), 1)
	}
	keyName := "keys/" + strings.ReplaceAll(s.key.ID(), ":", "-") + ".pub"
	for _, tc := range []struct {
		name, member string
		edit         func([]byte) []byte
		reason       string
	}{
		{"record serial", "record.json", func(c []byte) []byte { return replace(c, `"serial":"SN-17"`, `"serial":"SN-18"`) }, "serial"},
		{"record value", "record.json", func(c []byte) []byte { return replace(c, `"ideal_gain":2`, `"ideal_gain":3`) }, "signature"},
		{"readings", "readings.csv", func(c []byte) []byte { return replace(c, "verify,2,1,2,", "verify,2,1,3,") }, "readings"},
		{"limits file", "files/limits-limits-a.yaml", func(c []byte) []byte { return flip(c, 3) }, "the record names"},
		{"pdf", "certificate.pdf", func(c []byte) []byte { return flip(c, 20) }, "seal"},
		{"seal number", "certificate.pdf.seal", func(c []byte) []byte { return replace(c, s.number, "TL1-000009") }, "number"},
		{"seal pdf hash", "certificate.pdf.seal", func(c []byte) []byte { return replace(c, sha(members["certificate.pdf"])[:8], "00000000") }, "PDF"},
		{"key", keyName, func([]byte) []byte { _, pem := otherKey(t); return pem }, "key"},
	} {
		forged := forge(t, data, tc.member, tc.edit(members[tc.member]))
		_, err := open(forged)
		if !errors.Is(err, bundle.ErrBadBundle) || !strings.Contains(err.Error(), tc.reason) {
			t.Errorf("%s: Open gives %v, want ErrBadBundle about %q", tc.name, err, tc.reason)
		} else {
			t.Logf("%-14s -> %v", tc.name, err)
		}
	}
}

// forge replaces member with content and updates the manifest to match.
func forge(t *testing.T, data []byte, member string, content []byte) []byte {
	t.Helper()
	var m bundle.Manifest
	if err := json.Unmarshal(unzip(t, data)["manifest.json"], &m); err != nil {
		t.Fatal(err)
	}
	for i := range m.Files {
		if m.Files[i].Path == member {
			m.Files[i].SHA256, m.Files[i].Size = sha(content), int64(len(content))
		}
	}
	if member == "record.json" {
		m.RecordSHA256 = sha(content)
	}
	man, err := json.MarshalIndent(m, "", "  ")
	if err != nil {
		t.Fatal(err)
	}
	man = append(man, '\n')
	return rebuild(t, data, func(name string, c []byte) []byte {
		switch name {
		case member:
			return content
		case "manifest.json":
			return man
		}
		return c
	})
}

// Import into a second ledger: the record comes back by certificate number, with
// its files and PDF in the blobs; importing again changes nothing; the importing
// ledger's own chain and certificate sequence are untouched and verify.
func TestImport(t *testing.T) {
	s := newStation(t)
	data, _ := export(t, s.led, s.number, s.all())
	b, err := open(data)
	if err != nil {
		t.Fatal(err)
	}

	audit, err := ledger.Open(ctx, filepath.Join(t.TempDir(), "audit.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer audit.Close()
	at := time.Date(2026, 1, 15, 10, 0, 0, 0, time.UTC)
	audit.Now = func() time.Time { return at }
	if err := bundle.Import(ctx, audit, b, "auditor-anna"); err != nil {
		t.Fatalf("Import: %v", err)
	}
	rec, ir, err := audit.ImportedRunByCertificate(ctx, s.number)
	if err != nil {
		t.Fatal(err)
	}
	sameRecord(t, s.rec, rec)
	_, meta, _ := s.led.RunByCertificate(ctx, s.number)
	pdf, _ := os.ReadFile(s.pdfPath)
	seal, _ := os.ReadFile(s.sealPath)
	if ir.RunID != s.rec.RunID || ir.Number != s.number || ir.Station != "EOL-2" || ir.Serial != "SN-17" ||
		ir.RecordSHA256 != meta.RecordSHA256 || ir.KeyID != s.key.ID() || !bytes.Equal(ir.Signature, meta.Signature) ||
		ir.PDFSHA256 != sha(pdf) || ir.SealSHA256 != sha(seal) || ir.PublicKeySHA256 == "" ||
		!ir.ImportedAt.Equal(at) || ir.ImportedBy != "auditor-anna" || ir.Source != "trimline-bundle-v1 sha256:"+sha(data) ||
		!bytes.Equal(ir.RecordJSON, b.RecordJSON) {
		t.Errorf("imported run %+v", ir)
	}
	for k, v := range s.files {
		if got, err := audit.Blob(ctx, k); err != nil || !bytes.Equal(got, v) {
			t.Errorf("file blob %s: %v", k, err)
		}
	}
	if got, err := audit.Blob(ctx, ir.PDFSHA256); err != nil || !bytes.Equal(got, pdf) {
		t.Errorf("PDF blob: %v", err)
	}
	if got, err := audit.Blob(ctx, ir.SealSHA256); err != nil || !bytes.Equal(got, seal) {
		t.Errorf("seal blob: %v", err)
	}
	if rec2, ir2, err := audit.ImportedRunByID(ctx, s.rec.RunID); err != nil || ir2.Number != s.number {
		t.Errorf("ImportedRunByID: %v", err)
	} else {
		sameRecord(t, s.rec, rec2)
	}

	counts := func() map[string]int {
		c, err := audit.Counts(ctx)
		if err != nil {
			t.Fatal(err)
		}
		list, err := audit.ImportedRuns(ctx)
		if err != nil {
			t.Fatal(err)
		}
		c["imported_runs"] = len(list)
		return c
	}
	before := counts()
	if before["imported_runs"] != 1 || before["runs"] != 0 || before["units"] != 0 || before["readings"] != 0 ||
		before["audit_trail"] != 1 || before["blobs"] != 6 {
		t.Errorf("counts after import %v", before)
	}
	trail, err := audit.AuditTrail(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if e := trail[len(trail)-1]; e.Action != "import" || e.Subject != s.rec.RunID || e.Actor != "auditor-anna" || !e.At.Equal(at) ||
		!strings.Contains(e.Detail, s.number) {
		t.Errorf("audit entry %+v", e)
	}

	// Again, from the same bundle and from a fresh Open of it: nothing changes.
	at = at.Add(time.Hour)
	b2, err := open(data)
	if err != nil {
		t.Fatal(err)
	}
	for _, bb := range []*bundle.Bundle{b, b2} {
		if err := bundle.Import(ctx, audit, bb, "auditor-ben"); !errors.Is(err, ledger.ErrAlreadyImported) {
			t.Fatalf("import again: %v, want ErrAlreadyImported", err)
		}
	}
	if after := counts(); !mapsEqual(before, after) {
		t.Errorf("importing again changed the ledger: %v -> %v", before, after)
	}

	// The same run with other contents is a conflict, not a second import.
	partial := *b
	partial.PDF, partial.Seal = nil, nil
	if err := bundle.Import(ctx, audit, &partial, "auditor-anna"); !errors.Is(err, ledger.ErrImportConflict) {
		t.Errorf("import of the run without its PDF: %v, want ErrImportConflict", err)
	}
	// A station cannot import its own run.
	if err := bundle.Import(ctx, s.led, b, "auditor-anna"); !errors.Is(err, ledger.ErrDuplicateRun) {
		t.Errorf("import into the source ledger: %v, want ErrDuplicateRun", err)
	}
	if err := bundle.Import(ctx, audit, b, ""); !errors.Is(err, ledger.ErrInvalid) {
		t.Errorf("import without an actor: %v, want ErrInvalid", err)
	}

	// The importing ledger's own runs: not the imported one, a sequence of its own.
	if _, _, err := audit.RunByCertificate(ctx, s.number); !errors.Is(err, ledger.ErrNotFound) {
		t.Errorf("RunByCertificate of the imported number: %v, want ErrNotFound", err)
	}
	own := record("local-1", "SN-99", sequencer.Pass, nil)
	if n, err := audit.RecordRun(ctx, own, "TL1"); err != nil || n != "TL1-000001" {
		t.Errorf("local run after the import: %q, %v; want TL1-000001", n, err)
	}
	verifyKey := func(keyID string, msg, sig []byte) bool {
		return keyID == s.key.ID() && signing.Verify(s.key.Public, msg, sig)
	}
	rep, err := audit.VerifyChain(ctx, "")
	if err != nil || !rep.OK {
		t.Fatalf("VerifyChain after import: %+v, %v", rep, err)
	}
	if rep.Runs != 1 || rep.AuditEntries != 2 || rep.Blobs != 6 {
		t.Errorf("VerifyChain report %+v", rep)
	}
	irep, err := audit.VerifyImports(ctx, ledger.ChainOptions{Verify: verifyKey, RequireSignatures: true})
	if err != nil || !irep.OK || irep.Imports != 1 || irep.Verified != 1 {
		t.Errorf("VerifyImports: %+v, %v", irep, err)
	}
}

func mapsEqual(a, b map[string]int) bool {
	if len(a) != len(b) {
		return false
	}
	for k, v := range a {
		if b[k] != v {
			return false
		}
	}
	return true
}

// An unsigned FAULT run without a certificate: exported by run id, opened with
// notes on what could not be checked, imported and found by run id.
func TestUnsignedFaultRun(t *testing.T) {
	dir := t.TempDir()
	led, err := ledger.Open(ctx, filepath.Join(dir, "ledger.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer led.Close()
	contents, refs := files("f")
	rec := record("run-fault", "SN-5", sequencer.Fault, refs)
	delete(contents, refs[2].SHA256) // the limits file's content was not kept
	if n, err := led.RecordRunWith(ctx, rec, ledger.RecordOptions{Files: contents}); err != nil || n != "" {
		t.Fatalf("record: %q %v", n, err)
	}
	data, m := export(t, led, "run-fault", bundle.Options{})
	if m.Number != "" || m.KeyID != "" || m.RecordSignature != nil || len(m.Files) != 4 {
		t.Errorf("manifest %+v", m)
	}
	b, err := open(data)
	if err != nil {
		t.Fatal(err)
	}
	sameRecord(t, rec, b.Record)
	for _, want := range []string{"not signed", "limits-f.yaml"} {
		if !slices.ContainsFunc(b.Notes, func(n string) bool { return strings.Contains(n, want) }) {
			t.Errorf("Notes do not say %q: %q", want, b.Notes)
		}
	}
	if err := b.VerifyWith(nil); !errors.Is(err, bundle.ErrBadBundle) {
		t.Errorf("VerifyWith on an unsigned run: %v", err)
	}
	audit, err := ledger.Open(ctx, filepath.Join(dir, "audit.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer audit.Close()
	if err := bundle.Import(ctx, audit, b, "qa"); err != nil {
		t.Fatal(err)
	}
	got, ir, err := audit.ImportedRunByID(ctx, "run-fault")
	if err != nil || ir.Number != "" || ir.KeyID != "" || ir.PDFSHA256 != "" {
		t.Fatalf("ImportedRunByID: %+v %v", ir, err)
	}
	sameRecord(t, rec, got)
	if _, _, err := audit.ImportedRunByCertificate(ctx, ""); !errors.Is(err, ledger.ErrNotFound) {
		t.Errorf("ImportedRunByCertificate(\"\"): %v", err)
	}
	if rep, err := audit.VerifyImports(ctx, ledger.ChainOptions{RequireSignatures: true}); err != nil || rep.OK {
		t.Errorf("VerifyImports requiring signatures of an unsigned import: %+v %v", rep, err)
	}
	if rep, err := audit.VerifyChain(ctx, ""); err != nil || !rep.OK {
		t.Errorf("VerifyChain: %+v %v", rep, err)
	}
}

// Export refuses documents that are not the run's, a key that is not its key, and
// unknown runs.
func TestExportRefuses(t *testing.T) {
	s := newStation(t)
	var sink bytes.Buffer
	other := filepath.Join(s.dir, "other.pdf")
	os.WriteFile(other, []byte("%PDF-1.4 another\n"), 0o644)
	_, otherPub, err := signing.Init(filepath.Join(s.dir, "k2"), "other")
	if err != nil {
		t.Fatal(err)
	}
	for what, opt := range map[string]bundle.Options{
		"PDF not recorded":          {PDFPath: other},
		"seal of another PDF":       {PDFPath: other, SealPath: s.sealPath},
		"another key":               {PublicKeyPath: otherPub},
		"seal as PDF":               {PDFPath: s.sealPath},
		"PDF path missing":          {PDFPath: filepath.Join(s.dir, "nope.pdf")},
		"seal of the right PDF bad": {PDFPath: s.pdfPath, SealPath: s.pdfPath},
	} {
		if _, err := bundle.Export(ctx, s.led, s.number, &sink, opt); err == nil {
			t.Errorf("%s: Export succeeded", what)
		}
	}
	if _, err := bundle.Export(ctx, s.led, "TL1-000099", &sink, bundle.Options{}); !errors.Is(err, ledger.ErrNotFound) {
		t.Errorf("unknown run: %v, want ErrNotFound", err)
	}
}
