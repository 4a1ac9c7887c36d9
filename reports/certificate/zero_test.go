package certificate_test

import (
	"strings"
	"testing"

	"trimline/instruments"
	"trimline/sequencer"
)

// A run with a zero check: the station-zero table prints the record's ô_s with
// its expanded uncertainty rounded up to two significant digits (JCGM 100
// §7.2.6: 0.3104 µV ± 0.0912 µV → 0.310 ± 0.092 µV, hand-worked), the same times
// the ideal gain 200 at the output (62.08 ± 18.24 → 62 ± 19 µV), and the fits
// that used it in place of the source's offset spec; a sample without one has no
// such section.
func TestZeroCheckOnTheCertificate(t *testing.T) {
	rec := sampleRecord()
	if text := pdfText(t, render(t, rec, opt)); strings.Contains(text, "Station zero") {
		t.Fatal("a record without a zero check shows a station-zero section")
	}
	rs := make([]instruments.Reading, 8)
	rec.Zeros = []sequencer.ZeroCheck{{Name: "station zero", Source: "source", Range: 0.1, Shorted: rs, AtZero: rs, Gain: 200,
		Offset: 0.3104e-6, Unc: sequencer.Uncertainty{Std: 0.0413e-6, DOF: 12.4, K: 2.208, Expanded: 0.0912e-6, Method: "GUM"}, Valid: true,
		SpecU: 0.2887e-6, Applied: true}}
	for i := range rec.Fits {
		rec.Fits[i].SourceZero = "station zero"
	}
	var steps []string
	for _, f := range rec.Fits {
		steps = append(steps, f.Step)
	}
	text := pdfText(t, render(t, rec, opt))
	requireText(t, text,
		"Station zero",
		"station zero (source)", "8 each",
		"0.310 µV ± 0.092 µV", "k = 2.21 · νeff = 12",
		"62 µV ± 19 µV",
		strings.Join(steps, ", "),
		"replaced the source's offset specification",
	)

	// A check too noisy to beat the spec is shown, and said not to be applied as a
	// correction, its zero budgeted instead.
	rec.Zeros[0].Unc, rec.Zeros[0].Applied = sequencer.Uncertainty{Std: 1.9e-6, DOF: 14, K: 2.2, Expanded: 4.2e-6}, false
	for i := range rec.Fits {
		rec.Fits[i].SourceZero = ""
	}
	text = pdfText(t, render(t, rec, opt))
	requireText(t, text, "not applied", "its u is not below the spec's 0.2887 µV: no correction; the fits budget the spec, the uncorrected zero and its u")
}
