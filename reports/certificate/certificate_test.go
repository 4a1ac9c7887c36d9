package certificate_test

import (
	"bytes"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"trimline/limits"
	"trimline/reports/certificate"
	"trimline/sequencer"
)

var opt = certificate.Options{Number: "TL1-000042", Maker: "Example Sensor Works"}

func render(t testing.TB, rec *sequencer.Record, o certificate.Options) []byte {
	t.Helper()
	var buf bytes.Buffer
	if err := certificate.Write(&buf, rec, o); err != nil {
		t.Fatalf("Write: %v", err)
	}
	if !bytes.HasPrefix(buf.Bytes(), []byte("%PDF-")) {
		t.Fatalf("output is not a PDF: %q", buf.Bytes()[:min(16, buf.Len())])
	}
	return buf.Bytes()
}

// pdfText extracts the text of a PDF with pdftotext, skipping the test when the
// tool is not installed.
func pdfText(t *testing.T, pdf []byte) string {
	t.Helper()
	bin, err := exec.LookPath("pdftotext")
	if err != nil {
		t.Skip("pdftotext not installed")
	}
	dir := t.TempDir()
	in := filepath.Join(dir, "c.pdf")
	if err := os.WriteFile(in, pdf, 0o644); err != nil {
		t.Fatal(err)
	}
	out, err := exec.Command(bin, "-enc", "UTF-8", in, "-").Output()
	if err != nil {
		t.Fatalf("pdftotext: %v", err)
	}
	return string(out)
}

func TestWriteIsDeterministic(t *testing.T) {
	a := render(t, sampleRecord(), opt)
	b := render(t, sampleRecord(), opt)
	if !bytes.Equal(a, b) {
		t.Fatal("two renders of the same record differ")
	}
	other := sampleRecord()
	other.Serial = "BA7-2611-00439"
	if bytes.Equal(a, render(t, other, opt)) {
		t.Fatal("a different serial gave the same bytes")
	}
	if bytes.Equal(a, render(t, sampleRecord(), certificate.Options{Number: "TL1-000043", Maker: opt.Maker})) {
		t.Fatal("a different certificate number gave the same bytes")
	}
}

// The map in Outcome.Values must not make the output depend on iteration order.
func TestWriteDeterministicAcrossMapOrder(t *testing.T) {
	want := render(t, sampleRecord(), opt)
	for range 20 {
		rec := sampleRecord()
		for i := range rec.Outcomes {
			v := map[string]float64{}
			for k, x := range rec.Outcomes[i].Values {
				v[k] = x
			}
			rec.Outcomes[i].Values = v
		}
		if !bytes.Equal(want, render(t, rec, opt)) {
			t.Fatal("output depends on map order")
		}
	}
}

func TestWriteIsCompressedAndDated(t *testing.T) {
	pdf := render(t, sampleRecord(), opt)
	if !bytes.Contains(pdf, []byte("/FlateDecode")) {
		t.Error("content is not compressed")
	}
	if !bytes.Contains(pdf, []byte("D:20260314094155")) {
		t.Error("creation date is not the record's finish time")
	}
	if bytes.Contains(pdf, []byte("/Helvetica")) || bytes.Contains(pdf, []byte("/Courier")) {
		t.Error("a core font is used")
	}
}

func TestSampleRecordHasOneFailure(t *testing.T) {
	rec := sampleRecord()
	failed := 0
	for _, o := range rec.Outcomes {
		if !o.Pass {
			failed++
		}
	}
	if len(rec.Outcomes) != 8 || failed != 1 || rec.Verdict != sequencer.Fail {
		t.Fatalf("fixture: %d outcomes, %d failed, verdict %s; want 8, 1, FAIL", len(rec.Outcomes), failed, rec.Verdict)
	}
}

func TestTextContent(t *testing.T) {
	rec := sampleRecord()
	text := pdfText(t, render(t, rec, opt))
	for _, want := range []string{
		"Trim and calibration certificate",
		rec.Serial, opt.Number, opt.Maker, rec.RunID, rec.Station, rec.Operator, rec.Software,
		"2026-03-14 09:41:55 UTC",
		"FAIL", "1 of 8 limits failed",
		"µV", "±", "°C", "Ω",
		"±(30 ppm of reading", "23 °C ± 5 °C",
		"EQ-0097", "FM75-10292", "2026-06-15",
		"ba7-limits-rev4.yaml", "9e107d9d372bb6826bd81d3542a419d6e277d4d731479571562b82f74494341f",
		"1873.417", "2405",
		"Before trim", "After trim", "stimulus (mV)", "error (mV)", "error (µV)",
		"post_drift", "not measured: one verify sweep only",
		"Page 1 of", "not be reproduced except in full",
	} {
		if !strings.Contains(text, want) {
			t.Errorf("text lacks %q", want)
		}
	}
	for _, o := range rec.Outcomes {
		if !strings.Contains(text, o.Name) {
			t.Errorf("text lacks limit %q", o.Name)
		}
	}
	if strings.Contains(text, "PASS\n\n1 of 8") || strings.Contains(strings.ToLower(text), "no data") {
		t.Error("unexpected verdict or missing plot data")
	}
}

func TestPassVerdict(t *testing.T) {
	text := pdfText(t, render(t, passRecord(), opt))
	for _, want := range []string{"PASS", "8 of 8 limits passed"} {
		if !strings.Contains(text, want) {
			t.Errorf("text lacks %q", want)
		}
	}
	if strings.Contains(text, "FAIL") || strings.Contains(text, "Why the verdict") {
		t.Error("a PASS certificate mentions a failure")
	}
}

func TestFaultRecordRenders(t *testing.T) {
	rec := faultRecord()
	pdf := render(t, rec, certificate.Options{})
	if !bytes.Equal(pdf, render(t, faultRecord(), certificate.Options{})) {
		t.Error("FAULT record renders differently twice")
	}
	text := pdfText(t, pdf)
	for _, want := range []string{"FAULT", "not certified", "Not a certificate", "No data", "meter: read timed out after 2 s", rec.Serial} {
		if !strings.Contains(text, want) {
			t.Errorf("text lacks %q", want)
		}
	}
}

func TestEmptyAndOddRecordsRender(t *testing.T) {
	aborted := &sequencer.Record{Verdict: sequencer.Aborted} // zero times, nothing measured
	a := render(t, aborted, certificate.Options{})
	time.Sleep(1100 * time.Millisecond) // a wall-clock date would change by now
	if !bytes.Equal(a, render(t, aborted, certificate.Options{})) {
		t.Error("a record without a finish time is not reproducible")
	}

	odd := sampleRecord()
	odd.Outcomes[0].Values["pre_offset"] = math.NaN()
	odd.Outcomes = append(odd.Outcomes, limits.Outcome{Name: "empty"})
	odd.Sweeps[1].Points[3].Valid = 0
	odd.Sweeps[1].Points[4].Mean = math.Inf(1)
	odd.Sweeps[0].Points = odd.Sweeps[0].Points[:1]
	odd.Fits[0].Slope = math.NaN()
	odd.Trims[0].Readback = 1872
	odd.Trims[1].Saturated = true
	odd.Instruments[0].CalDue = "2025-12-31"
	odd.Verdict = "WEIRD"
	odd.Serial = "../../etc/passwd"
	text := pdfText(t, render(t, odd, opt))
	for _, want := range []string{"WEIRD", "not valid", "differs from written", "overdue at test"} {
		if !strings.Contains(text, want) {
			t.Errorf("text lacks %q", want)
		}
	}
}

func TestLongRecordPaginates(t *testing.T) {
	rec := sampleRecord()
	base := rec.Outcomes
	for i := range 6 {
		for _, o := range base {
			o.Name = o.Name + "_" + string(rune('a'+i))
			rec.Outcomes = append(rec.Outcomes, o)
		}
	}
	rec.Reasons = append(rec.Reasons, strings.Repeat("a very long reason that has to wrap across the width of the page ", 6))
	text := pdfText(t, render(t, rec, opt))
	pages := strings.Count(text, "\f")
	if pages < 3 {
		t.Fatalf("%d pages, want at least 3", pages)
	}
	for p := 1; p <= pages; p++ {
		want := "Page " + strconv.Itoa(p) + " of " + strconv.Itoa(pages)
		if !strings.Contains(text, want) {
			t.Errorf("text lacks %q", want)
		}
	}
	if !strings.Contains(text, "codes_in_range_f") {
		t.Error("last outcome is missing")
	}
}

func TestNilRecord(t *testing.T) {
	if err := certificate.Write(&bytes.Buffer{}, nil, opt); err == nil {
		t.Error("Write(nil) did not fail")
	}
	if err := certificate.WriteFile(filepath.Join(t.TempDir(), "x.pdf"), nil, opt); err == nil {
		t.Error("WriteFile(nil) did not fail")
	}
}

func TestWriteFileIsAtomic(t *testing.T) {
	dir := t.TempDir()
	rec := sampleRecord()
	path := filepath.Join(dir, certificate.FileName(rec, opt))
	if err := os.WriteFile(path, []byte("old"), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := certificate.WriteFile(path, rec, opt); err != nil {
		t.Fatalf("WriteFile: %v", err)
	}
	got, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(got, render(t, rec, opt)) {
		t.Error("file content differs from Write")
	}
	entries, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	if len(entries) != 1 || entries[0].Name() != "TL1-000042_BA7-2611-00437.pdf" {
		var names []string
		for _, e := range entries {
			names = append(names, e.Name())
		}
		t.Errorf("directory holds %v, want only the certificate", names)
	}
	if fi, err := os.Stat(path); err != nil || fi.Mode().Perm() != 0o644 {
		t.Errorf("mode %v, %v; want 0644", fi.Mode(), err)
	}

	// Into a directory that does not exist: an error, and nothing is created.
	bad := filepath.Join(dir, "missing", "c.pdf")
	if err := certificate.WriteFile(bad, rec, opt); err == nil {
		t.Error("WriteFile into a missing directory did not fail")
	}
	if entries, _ := os.ReadDir(dir); len(entries) != 1 {
		t.Errorf("failed write left %d entries", len(entries))
	}
}

func TestFileName(t *testing.T) {
	for _, tc := range []struct {
		number, serial, want string
	}{
		{"TL1-000042", "BA7-2611-00437", "TL1-000042_BA7-2611-00437.pdf"},
		{"TL1/000042", "SN 12:34", "TL1_000042_SN_12_34.pdf"},
		{"", "../../etc/passwd", "_._.._etc_passwd.pdf"},
		{"TL1-7", "", "TL1-7.pdf"},
		{"", "", "certificate.pdf"},
		{"TL1-8", "µ-Ω", "TL1-8__-_.pdf"},
	} {
		got := certificate.FileName(&sequencer.Record{Serial: tc.serial}, certificate.Options{Number: tc.number})
		if got != tc.want {
			t.Errorf("FileName(%q, %q) = %q, want %q", tc.number, tc.serial, got, tc.want)
		}
		if strings.ContainsAny(got, "/\\") || strings.HasPrefix(got, ".") {
			t.Errorf("unsafe file name %q", got)
		}
	}
}

// Write may be called from several goroutines at once (a station issuing while an
// operator reprints); the documents must not interfere.
func TestConcurrentWrites(t *testing.T) {
	want := render(t, sampleRecord(), opt)
	errs := make(chan string, 8)
	for range 8 {
		go func() {
			var buf bytes.Buffer
			if err := certificate.Write(&buf, sampleRecord(), opt); err != nil {
				errs <- err.Error()
				return
			}
			if !bytes.Equal(buf.Bytes(), want) {
				errs <- "concurrent render differs"
				return
			}
			errs <- ""
		}()
	}
	for range 8 {
		if e := <-errs; e != "" {
			t.Error(e)
		}
	}
}

// TestWriteSamples writes sample certificates for a person to look at when
// CERTIFICATE_SAMPLES names a directory:
//
//	CERTIFICATE_SAMPLES=/tmp go test -run Samples ./reports/certificate/
func TestWriteSamples(t *testing.T) {
	dir := os.Getenv("CERTIFICATE_SAMPLES")
	if dir == "" {
		t.Skip("set CERTIFICATE_SAMPLES to a directory to write sample certificates")
	}
	for name, rec := range map[string]*sequencer.Record{"fail": sampleRecord(), "pass": passRecord(), "fault": faultRecord()} {
		if err := certificate.WriteFile(filepath.Join(dir, "cert-"+name+".pdf"), rec, opt); err != nil {
			t.Fatal(err)
		}
	}
}
