package certificate_test

import (
	"math"
	"strings"
	"testing"

	"trimline/sequencer"
)

// A result's budget is printed under "Uncertainty budget" as the record gives
// it: each input's u(x), its sensitivity (or "per point" for the per-point
// inputs), its contribution |c|·u(x) (JCGM 100 §5.1.3, eq. (10)) and its share
// of u²; an input with sensitivity 0 is left out and said to be. A record
// without budgets (made before they were kept) has no such section.
func TestBudgetSection(t *testing.T) {
	if text := pdfText(t, render(t, sampleRecord(), opt)); strings.Contains(text, "Uncertainty budget") {
		t.Fatal("a record without budgets prints an uncertainty budget")
	}
	rec := sampleRecord()
	sq3, inf := math.Sqrt(3), math.Inf(1)
	// The demo station's terms on a gain-of-100 card: the source's 0.5 µV offset
	// half-width ×100, the meter's 30 ppm at 2.5 V, its 40 µV offset.
	rows := []sequencer.BudgetRow{
		{Name: "repeatability", Kind: "A", InputU: 0.74e-6, InputUnit: "V", Points: 11, U: 0.22e-6, DOF: 77},
		{Name: "meter gain", Kind: "B", InputU: 30e-6 / sq3, InputUnit: "1", Sensitivity: -2.5, U: 75e-6 / sq3, DOF: inf},
		{Name: "meter offset", Kind: "B", InputU: 40e-6 / sq3, InputUnit: "V", Sensitivity: -1, U: 40e-6 / sq3, DOF: inf},
		{Name: "source gain", Kind: "B", InputU: 20e-6 / sq3, InputUnit: "1", U: 0, DOF: inf},
		{Name: "source offset", Kind: "B", InputU: 0.5e-6 / sq3, InputUnit: "V", Sensitivity: -100, U: 50e-6 / sq3, DOF: inf},
	}
	var v float64
	for _, r := range rows {
		v += r.U * r.U
	}
	for i := range rows {
		rows[i].Share = rows[i].U * rows[i].U / v
	}
	for i, r := range rec.Results {
		if r.Name == "post_offset" {
			rec.Results[i].Budget = rows
		}
	}
	requireText(t, pdfText(t, render(t, rec, opt)),
		"Uncertainty budget",
		"repeatability A 740 nV per point (11) 220 nV 77 < 0.1 %",
		"meter gain B 17.3 ppm −2.5 µV/ppm 43.3 µV ∞ 57.8 %", // 1875 of 3241.7 µV²
		"meter offset B 23.1 µV −1 V/V 23.1 µV ∞ 16.5 %",     // 533.3 of 3241.7 µV²,
		"source offset B 289 nV −100 V/V 28.9 µV ∞ 25.7 %",   // 833.3 of 3241.7 µV²,
		"combined u",
		"Inputs with sensitivity 0",
	)
}
