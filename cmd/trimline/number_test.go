package main

import (
	"bytes"
	"context"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"trimline/instruments/units"
	"trimline/reports/certificate"
	"trimline/sequencer"
)

// ofx10Files copies the OFX-10 worked example (sequencer/testdata/ofx10) into a
// temporary folder, each file passed through edit, and returns the folder.
func ofx10Files(t *testing.T, edit func(name, text string) string) string {
	t.Helper()
	src := filepath.Join("..", "..", "sequencer", "testdata", "ofx10")
	dir := t.TempDir()
	for _, name := range []string{"ofx10-station.yaml", "ofx10-sequence.yaml", "ofx10-limits.yaml"} {
		data, err := os.ReadFile(filepath.Join(src, name))
		if err != nil {
			t.Fatal(err)
		}
		text := string(data)
		if edit != nil {
			text = edit(name, text)
		}
		if err := os.WriteFile(filepath.Join(dir, name), []byte(text), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	return dir
}

// runOFX10 runs the OFX-10 files in dir for serial on the simulated bench.
func runOFX10(t *testing.T, dir, serial string) (*sequencer.Record, *sequencer.Sequence) {
	t.Helper()
	st, err := sequencer.LoadStation(filepath.Join(dir, "ofx10-station.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	seq, err := sequencer.LoadSequence(filepath.Join(dir, "ofx10-sequence.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	e, err := sequencer.Open(context.Background(), sequencer.Config{Station: st, Sequence: seq, Operator: "test", Software: "test"})
	if err != nil {
		t.Fatal(err)
	}
	defer e.Close()
	return e.Run(context.Background(), serial), seq
}

// A fit's lack of fit (χ²/ν) is a plain number: a limit file judges it with the
// empty unit, unscaled, and the certificate and the summary show it bare
// ("1.30"), not as a ratio ("130 %"): pre_lof judged by a limit, post_lof in the
// certificate's table of results no limit uses.
func TestLackOfFitIsAPlainNumber(t *testing.T) {
	dir := ofx10Files(t, func(name, text string) string {
		switch name {
		case "ofx10-sequence.yaml":
			text = strings.Replace(text, "      gain_error: pre_gain_error  # not trimmed: judged as found\n",
				"      gain_error: pre_gain_error  # not trimmed: judged as found\n      lack_of_fit: pre_lof\n", 1)
			return strings.Replace(text, "      noise: post_noise\n", "      noise: post_noise\n      lack_of_fit: post_lof\n", 1)
		case "ofx10-limits.yaml":
			return text + `  - name: straight line as found
    description: Lack of fit of the as-found line (chi-squared per degree of freedom).
    unit: ""
    uses: [pre_lof]
    tolerance: {upper: 5}
`
		}
		return text
	})
	rec, seq := runOFX10(t, dir, "OFX-0001")
	if rec.Verdict != sequencer.Pass {
		t.Fatalf("verdict %s, fault %q, reasons %q", rec.Verdict, rec.Fault, rec.Reasons)
	}
	var lof, postLOF *sequencer.Result
	for i, r := range rec.Results {
		switch r.Name {
		case "pre_lof":
			lof = &rec.Results[i]
		case "post_lof":
			postLOF = &rec.Results[i]
		}
	}
	for _, r := range []*sequencer.Result{lof, postLOF} {
		if r == nil || !r.Valid || r.Unit != "number" {
			t.Fatalf("lack of fit %+v, want a valid result of unit number", r)
		}
	}
	if got := sequencer.RecordCatalog(rec)["pre_lof"]; got != units.Number {
		t.Errorf("RecordCatalog: pre_lof is a %s, want a plain number", got)
	}
	judged := false
	for _, o := range rec.Outcomes {
		if o.Name == "straight line as found" {
			judged = o.Pass
		}
	}
	if !judged {
		t.Errorf("the limit on pre_lof = %g did not pass: outcomes %+v", lof.Value, rec.Outcomes)
	}

	// The summary spreads it unscaled.
	tally := &sequencer.Tally{Results: seq.Results(), Records: []*sequencer.Record{rec}}
	var sum bytes.Buffer
	printSummary(&sum, tally.Summary())
	if !strings.Contains(sum.String(), "pre_lof") || strings.Contains(lineWith(sum.String(), "pre_lof"), "%") {
		t.Errorf("summary line for pre_lof %q: want it unscaled, with no %%", lineWith(sum.String(), "pre_lof"))
	}

	// The certificate's results table shows it bare.
	if _, err := exec.LookPath("pdftotext"); err != nil {
		t.Skip("pdftotext not installed")
	}
	var pdf bytes.Buffer
	if err := certificate.Write(&pdf, rec, certificate.Options{Number: "TL1-000001"}); err != nil {
		t.Fatal(err)
	}
	p := filepath.Join(t.TempDir(), "c.pdf")
	if err := os.WriteFile(p, pdf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	out, err := exec.Command("pdftotext", "-layout", "-enc", "UTF-8", p, "-").Output()
	if err != nil {
		t.Fatal(err)
	}
	if row := lineWith(string(out), "straight line as found"); !strings.Contains(row, "≤5") || strings.Contains(row, "%") {
		t.Errorf("certificate row for the limit on pre_lof %q: want it judged ≤ 5, no %%", row)
	}
	plain := units.FormatNumber(postLOF.Value, 3) // e.g. "1.30"
	if row := lineWith(string(out), "post_lof"); !strings.Contains(row, " "+plain+" ") || strings.Contains(row, "%") {
		t.Errorf("certificate row for post_lof %q: want %q, no %%", row, plain)
	}
}

// lineWith is the first line of text holding s, "" when none does.
func lineWith(text, s string) string {
	for _, l := range strings.Split(text, "\n") {
		if strings.Contains(l, s) {
			return l
		}
	}
	return ""
}

// The OFX-10 worked example fits offset and gain error as found, and offset,
// nonlinearity and noise as left: its live line shows the offset before → after
// and nothing for gain error, which has no as-left partner (it used to be paired
// with the nonlinearity, as if one quantity had improved).
func TestLiveLineOFX10PairsOnlyTheSameQuantity(t *testing.T) {
	rec, _ := runOFX10(t, ofx10Files(t, nil), "OFX-0001")
	if rec.Verdict != sequencer.Pass {
		t.Fatalf("verdict %s, fault %q, reasons %q", rec.Verdict, rec.Fault, rec.Reasons)
	}
	for _, c := range []struct{ name, quantity string }{
		{"pre_offset", "offset"}, {"pre_gain_error", "gain_error"}, {"offset_code", "code"},
		{"post_offset", "offset"}, {"post_nonlinearity", "nonlinearity"}, {"post_noise", "noise"},
	} {
		found := false
		for _, r := range rec.Results {
			if r.Name == c.name {
				found = true
				if r.Quantity != c.quantity {
					t.Errorf("%s: quantity %q, want %q", c.name, r.Quantity, c.quantity)
				}
			}
		}
		if !found {
			t.Errorf("no result %s", c.name)
		}
	}
	line := liveLine(1, 1, rec, "")
	if !regexp.MustCompile(`offset +\S+ [mµ]?V → +\S+ [mµn]?V`).MatchString(line) {
		t.Errorf("live line %q: want the offset before → after", line)
	}
	for _, bad := range []string{"gain", "nonlinearity", "noise", "%", "ppm"} {
		if strings.Contains(line, bad) {
			t.Errorf("live line %q holds %q: a result paired with another quantity", line, bad)
		}
	}
}
