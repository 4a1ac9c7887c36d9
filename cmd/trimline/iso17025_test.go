package main

import (
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

// The certificate covers the items of ISO/IEC 17025:2017 §7.8.2.1 a–p that apply to
// an in-house production certificate. The item list is from memory of the standard;
// each applicable item names the text that shows it on the page, each other item
// says why it does not apply to a unit trimmed and certified on the production line.
func TestCertificateCoversISO17025Items(t *testing.T) {
	if _, err := exec.LookPath("pdftotext"); err != nil {
		t.Skip("pdftotext not installed")
	}
	dir := t.TempDir()
	if code, out, errOut := runCLI(t, "demo", "--out", dir, "--units", "1", "--ambient", "22.5 °C"); code != 0 {
		t.Fatalf("demo: %d\n%s%s", code, out, errOut)
	}
	pdfs := mustGlob(t, filepath.Join(dir, "certificates", "*.pdf"))
	raw, err := exec.Command("pdftotext", pdfs[0], "-").Output()
	if err != nil {
		t.Fatal(err)
	}
	text := strings.Join(strings.Fields(string(raw)), " ")
	items := []struct {
		item, what string
		shown      []string // text on the certificate; nil = not applicable
		why        string
	}{
		{"a", "a title", []string{"Trim and calibration certificate"}, ""},
		{"b", "the name of the laboratory", []string{"Fenwright Labs", "Station TL1"}, ""},
		{"c", "where the work was done", []string{"Demo line, trim station 1"}, ""},
		{"d", "unique identification on every page and the end", []string{"TL1-000001", "Page 1 of", "Certificate TL1-000001 · serial BRX-00001"}, ""},
		{"e", "the customer", nil, "in-house production: the maker is its own customer; the unit ships under the maker's name"},
		{"f", "the method", []string{"BRX-200 rev C", "brx200-limits", "SHA-256"}, ""},
		{"g", "the item, unambiguously", []string{"BRX-00001", "BRX-200, revision C"}, ""},
		{"h", "date of receipt / sampling", nil, "the unit comes straight off the line into the fixture: its receipt is the test itself, and nothing is sampled"},
		{"i", "date of the work", []string{"Tested"}, ""},
		{"j", "date of issue", []string{"Issued"}, ""},
		{"k", "sampling plan and method", nil, "every unit is measured; there is no sampling"},
		{"l", "results relate only to the item", []string{"relate only to the unit"}, ""},
		{"m", "results with units", []string{"mV", "ppm", "µV", "± "}, ""},
		{"n", "deviations from the method", nil, "the engine runs the sequence file exactly as written (its SHA-256 is on the certificate); it has no way to deviate from it"},
		{"o", "who authorised the certificate", []string{"Signed by station key ed25519:"}, ""},
		{"p", "results from external providers", nil, "all results are measured on this station; nothing comes from an external provider"},
		// §7.8.4.1 / §7.8.6 additions for calibration certificates.
		{"7.8.4.1", "uncertainty, conditions, traceability, before and after adjustment", []string{"k = 2", "Ambient 22.5 °C", "traceable", "As found", "As left",
			"certificate KML-26-04439", "Kestrel Metrology Laboratory", "2 years spec, holds 18 °C to 28 °C"}, ""},
		{"7.8.6", "conformity statement with the decision rule", []string{"Guarded acceptance", "ILAC-G8"}, ""},
	}
	for _, it := range items {
		if it.shown == nil {
			if it.why == "" {
				t.Errorf("item %s (%s): neither shown nor explained", it.item, it.what)
			}
			continue
		}
		for _, s := range it.shown {
			if !strings.Contains(text, s) {
				t.Errorf("item %s (%s): %q not on the certificate", it.item, it.what, s)
			}
		}
	}
}
