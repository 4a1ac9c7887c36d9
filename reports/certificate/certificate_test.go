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

	"trimline/instruments"
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

// flat collapses every run of white space to one space, so that a phrase is found
// even where the page wrapped it.
func flat(s string) string { return strings.Join(strings.Fields(s), " ") }

// requireText fails t for every phrase (white space collapsed) text lacks.
func requireText(t *testing.T, text string, phrases ...string) {
	t.Helper()
	ft := flat(text)
	for _, p := range phrases {
		if !strings.Contains(ft, flat(p)) {
			t.Errorf("text lacks %q", p)
		}
	}
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

	// ISO/IEC 17025 §7.8.4.1 / §7.8.6 content.
	requireText(t, text,
		// every result with U, k and unit
		"−3 µV ± 13 µV", "17.9 ppm ± 2.8 ppm", "3.242 mV ± 0.014 mV", "63.13 ppm ± 0.49 ppm",
		"k = 2.00", "k = 2.11", "νeff = ∞", "νeff = 24", "MC",
		// tolerance, acceptance, zone, TUR, false-accept probability
		"−50 … 50 µV", "accept −37 … 37 µV", "−20 … 20 ppm", "accept −17.25 … 17.25 ppm", "≤ 10 µV",
		"conditional pass", "3.84:1 ¹", "7.29:1", "5.2 %", "< 0.0001 %",
		"¹ Test uncertainty ratio below the minimum the limit file requires",
		// decision rule, coverage, statements
		"Decision rule", "Guarded acceptance, non-binary statement (ILAC-G8:09/2019 §4.2.3), guard band w = r·U, r = 1",
		"Simple acceptance (ILAC-G8:09/2019 §4.2.1), w = 0", "Applies to limits post_offset and post_gain.", "Applies to limit post_noise.",
		"coverage probability of 95.45 %", "Decision statements", "lies in the conditional pass zone",
		// as found and as left
		"As found: before adjustment (pre-trim sweep)", "As left: after adjustment (verify sweep)",
		"Before trim, as found", "After trim, as left", "Sweep “pre-trim” (as found)", "Sweep “verify” (as left)",
		// conditions and traceability
		"Ambient 23.1 °C (entered by the operator)",
		"traceable to the SI through the reference instruments EQ-0142 (source, Fictive Metrology DCV-20 s/n FM20-55831, cal. due 2026-09-30) and EQ-0097 (meter,",
		"traceable to national measurement standards",
	)
	for _, want := range []string{"±", "k = 2", ":1", "conditional pass", "traceable"} {
		if !strings.Contains(text, want) {
			t.Errorf("text lacks %q", want)
		}
	}
	if strings.Contains(text, "U not evaluated") {
		t.Error("a record with uncertainties says U not evaluated")
	}
	if strings.Contains(text, "FX-BA7-03 (") {
		t.Error("the unit's trim port is named as a reference instrument")
	}
}

// The fixture's decisions: two guarded non-binary limits, one of them a
// conditional pass, and a one-sided simple one.
func TestSampleRecordDecisions(t *testing.T) {
	zones := map[string]string{}
	guarded := 0
	for _, o := range sampleRecord().Outcomes {
		if d := o.Decision; d != nil {
			zones[o.Name] = d.Zone
			if d.Rule == "guarded" && !d.Binary {
				guarded++
			}
		}
	}
	want := map[string]string{"post_offset": limits.ZonePass, "post_gain": limits.ZoneConditionalPass, "post_noise": limits.ZonePass}
	if guarded != 2 || len(zones) != 3 || zones["post_offset"] != want["post_offset"] || zones["post_gain"] != want["post_gain"] || zones["post_noise"] != want["post_noise"] {
		t.Fatalf("fixture zones %v, %d guarded non-binary; want %v, 2", zones, guarded, want)
	}
}

func TestReviewVerdict(t *testing.T) {
	rec := reviewRecord()
	pdf := render(t, rec, opt)
	if !bytes.Equal(pdf, render(t, reviewRecord(), opt)) {
		t.Error("REVIEW record renders differently twice")
	}
	text := pdfText(t, pdf)
	requireText(t, text,
		"REVIEW", "held for review: a result lies in a conditional zone",
		"Why the verdict is REVIEW", rec.Reasons[0],
		"conditional pass", "This unit is held for review by a person before it ships",
		"Issued 2026-03-14 09:41:55 UTC",
	)
	if strings.Contains(text, "Not a certificate") || strings.Contains(text, "FAIL") {
		t.Error("a REVIEW certificate reads as not certified or failed")
	}
	if n := strings.Count(flat(text), "held for review"); n < 2 {
		t.Errorf("“held for review” %d times, want it in the verdict box and at post_gain", n)
	}

	// Held for a low TUR (tur_policy: refuse), nothing in a conditional zone.
	rec = passRecord()
	o := &rec.Outcomes[2] // post_offset: pass zone, TUR 3.8:1 below 4:1
	o.Pass, o.Reason = false, "post_offset = −2.854 µV passes, but the TUR 3.8:1 is below the minimum 4:1 and tur_policy is refuse: review"
	rec.Outcomes[3].Decision.Zone, rec.Outcomes[3].Decision.Statement = limits.ZonePass, "guarded acceptance: pass"
	rec.Verdict, rec.Reasons = sequencer.Review, []string{"limit post_offset: " + o.Reason}
	text = pdfText(t, render(t, rec, opt))
	requireText(t, text, "held for review: a test uncertainty ratio is below the minimum", "tur_policy is refuse: review", "held for review")
	if strings.Contains(text, "FAIL") || strings.Contains(flat(text), "lies in a conditional zone") || strings.Contains(text, "Conditional zones") {
		t.Error("a pass held for its TUR reads as failed or conditional")
	}
}

// Records from before uncertainties were evaluated (all zero, no decisions, no
// coverage, no conditions) still render, and say so.
func TestRecordWithoutUncertaintyRenders(t *testing.T) {
	pdf := render(t, oldRecord(), opt)
	if !bytes.Equal(pdf, render(t, oldRecord(), opt)) {
		t.Error("old record renders differently twice")
	}
	text := pdfText(t, pdf)
	requireText(t, text,
		"U not evaluated", "Ambient temperature not recorded", "Limit expression", "abs(post_offset) <= 50",
		"−2.854 µV", "U not evaluated: the record holds no measurement uncertainty.",
		"8 limits: written as expressions", "1 of 8 limits failed", "traceable",
	)
	for _, bad := range []string{"k = ", "PFA", "TUR", "conditional", "coverage probability of"} {
		if strings.Contains(text, bad) {
			t.Errorf("old record shows %q", bad)
		}
	}
	// One toleranced limit without U: judged by simple acceptance, U not evaluated.
	rec := oldRecord()
	rec.Outcomes[2].Decision = &limits.Decision{Result: "post_offset", Lower: ptr(-50), Upper: ptr(50), Rule: "simple",
		Value: rec.Outcomes[2].Values["post_offset"], Binary: true, Zone: limits.ZonePass, Statement: "simple acceptance, U not evaluated"}
	text = pdfText(t, render(t, rec, opt))
	requireText(t, text, "−2.854 µV", "U not evaluated", "−50 … 50 µV", "simple acceptance, w = 0")
}

// Each zone has its word in the decision cell; PFA is given only for accepted results.
func TestZonesRender(t *testing.T) {
	rec := sampleRecord()
	for i, z := range []string{limits.ZoneConditionalFail, limits.ZoneFail} {
		o := &rec.Outcomes[2+i*3] // post_offset, post_noise
		o.Decision.Zone = z
		o.Pass = false
		o.Reason = "result outside its acceptance interval"
	}
	text := pdfText(t, render(t, rec, opt))
	requireText(t, text, "conditional fail", "conditional pass", "3 of 8 limits not passed")
	if strings.Contains(text, "result outside its acceptance interval") {
		t.Error("a toleranced limit's reason is repeated in the results table")
	}
	if n := strings.Count(text, "< 0.0001 %"); n != 0 {
		t.Errorf("a rejected result shows a false-accept probability (%d times)", n)
	}

	// A binary statement that records a conditional zone is a plain fail.
	rec = sampleRecord()
	g := &rec.Outcomes[3]
	g.Decision.Binary, g.Pass, g.Reason = true, false, "conditional pass, so fail (binary statement: only the acceptance interval passes)"
	text = pdfText(t, render(t, rec, opt))
	requireText(t, text, "conditional pass zone, binary")
	if strings.Contains(text, "5.2 %") {
		t.Error("a rejected binary result shows a false-accept probability")
	}
}

// Traceability is not claimed through an instrument past its calibration date or
// without one, nor when no reference instrument is recorded.
func TestTraceabilityGaps(t *testing.T) {
	rec := sampleRecord()
	rec.Instruments[0].CalDue = "2025-12-31"
	rec.Instruments[1].CalDue = ""
	requireText(t, pdfText(t, render(t, rec, opt)),
		"Traceability is not assured for this run: EQ-0142 was past its calibration due date (2025-12-31) when the unit was tested and EQ-0097 has no calibration due date on record.")
	rec.Instruments = rec.Instruments[2:]
	requireText(t, pdfText(t, render(t, rec, opt)), "No reference instrument (source or meter) is recorded for this run")
}

func TestSampleFitsThreePages(t *testing.T) {
	for name, rec := range map[string]*sequencer.Record{"fail": sampleRecord(), "review": reviewRecord(), "old": oldRecord()} {
		if pages := strings.Count(pdfText(t, render(t, rec, opt)), "\f"); pages > 3 {
			t.Errorf("%s record: %d pages, want at most 3", name, pages)
		}
	}
}

func TestPassVerdict(t *testing.T) {
	text := pdfText(t, render(t, passRecord(), opt))
	for _, want := range []string{"PASS", "8 of 8 limits passed", "conditional pass"} {
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
	for name, rec := range map[string]*sequencer.Record{"fail": sampleRecord(), "pass": passRecord(), "fault": faultRecord(),
		"review": reviewRecord(), "old": oldRecord(), "channels": channelRecord(), "counts": countRecord()} {
		if err := certificate.WriteFile(filepath.Join(dir, "cert-"+name+".pdf"), rec, opt); err != nil {
			t.Fatal(err)
		}
	}
}

// A station names its roles as it likes: the reference instruments are the roles
// whose recorded kind is a source or a meter (input and dmm here), and a record
// made before kinds were recorded is read by the role names source and meter.
func TestTraceabilityByKind(t *testing.T) {
	const statement = "The results are traceable to the SI through the reference instruments " +
		"EQ-0142 (input, Fictive Metrology DCV-20 s/n FM20-55831, cal. due 2026-09-30) and " +
		"EQ-0097 (dmm, Fictive Metrology DMM-75 s/n FM75-10292, cal. due 2026-06-15)"
	rec := sampleRecord()
	for i, rk := range []struct {
		role string
		kind sequencer.RoleKind
	}{{"input", sequencer.VoltageSource}, {"dmm", sequencer.VoltMeter}, {"card", sequencer.DUTPort}} {
		rec.Instruments[i].Role, rec.Instruments[i].Kind = rk.role, rk.kind
	}
	text := pdfText(t, render(t, rec, opt))
	requireText(t, text, statement)
	if strings.Contains(flat(text), "No reference instrument") {
		t.Error("the certificate says no reference instrument is recorded")
	}

	// A current source is a reference instrument too.
	rec.Instruments[0].Kind = sequencer.CurrentSource
	requireText(t, pdfText(t, render(t, rec, opt)), statement)

	old := sampleRecord() // no kinds: the roles are named source, meter and dut
	requireText(t, pdfText(t, render(t, old, opt)), "through the reference instruments EQ-0142 (source, Fictive Metrology DCV-20")
}

// A single measurement (a measure step's one-point sweep) shows as a row of the
// table of measurements at one level after the point tables: it draws no plot
// and names no band, and the header's count of verifying sweeps leaves it out.
func TestOnePointSweepIsARowNotAPlot(t *testing.T) {
	rec := passRecord()
	before := pdfText(t, render(t, passRecord(), opt))
	rec.Sweeps = append(rec.Sweeps, sequencer.Sweep{Name: "zero check", Stage: sequencer.AsLeft,
		Points: []sequencer.Point{{Stimulus: 0, Mean: 2.5031, SD: 12e-6, Valid: 2, Readings: make([]instruments.Reading, 2)}}})
	text := pdfText(t, render(t, rec, opt))
	// 2.5031 V − 2.5 V (the ideal at 0 V) = 3.1 mV.
	requireText(t, text, "Measurements at fixed levels", "zero check as left", "2.5031 V 3.1 mV 12 µV 2/2")
	if strings.Contains(text, "Sweep “zero check”") {
		t.Error("the measurement has a point table of its own")
	}
	if strings.Contains(text, "zero check sweep") || strings.Contains(text, "zero check and") {
		t.Error("a band or plot names the single measurement as a sweep")
	}
	for _, s := range []string{"verified by a second sweep", "verified by a sweep"} {
		if strings.Contains(before, s) != strings.Contains(text, s) {
			t.Errorf("the header's %q changed with a single measurement", s)
		}
	}
}
