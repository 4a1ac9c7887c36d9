package certificate_test

import (
	"math"
	"strings"
	"testing"

	"trimline/reports/certificate"
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

// A Monte Carlo result's budget: the rows are the law of propagation's, so
// the combined u under them is the root sum of their squares (JCGM 100
// §5.1.3, eq. (10)) with the GUM's νeff, the GUM u the record keeps
// (MCInterval.GUMStd); the u of the model values (JCGM 101:2008 §7.6) stands
// on a line of its own, beside no νeff (its k comes from the coverage
// interval, §7.7). Hand-worked: √(100² + 48²) = 110.9 µV.
func TestBudgetMonteCarloLines(t *testing.T) {
	gumU := math.Hypot(100e-6, 48e-6)
	r := sequencer.Result{Name: "post_offset", Unit: "V", Value: 48.5e-6, Valid: true,
		Unc: sequencer.Uncertainty{Std: 112e-6, DOF: 91, K: 2.06, Expanded: 230e-6, Method: "MC",
			MC: &sequencer.MCInterval{Low: -180e-6, High: 278e-6, Interval: "symmetric", Trials: 200000, GUMStd: gumU, GUMExpanded: 2.03 * gumU}},
		Budget: []sequencer.BudgetRow{
			{Name: "source offset", Kind: "B", InputU: 0.5e-6, InputUnit: "V", Sensitivity: -200, U: 100e-6, DOF: math.Inf(1)},
			{Name: "repeatability", Kind: "A", InputU: 1e-6, InputUnit: "V", Points: 11, U: 48e-6, DOF: 91},
		}}
	rows, _ := certificate.BudgetText(r)
	if len(rows) != 4 {
		t.Fatalf("%d lines, want 2 inputs, combined u, Monte Carlo u: %q", len(rows), rows)
	}
	if got := rows[2]; got[0] != "combined u" || got[4] != "111 µV" || got[5] != "91" {
		t.Errorf("combined line %q, want the rows' root sum of squares 111 µV with νeff 91", got)
	}
	if got := rows[3]; got[0] != "Monte Carlo u" || got[4] != "112 µV" || got[5] != "—" {
		t.Errorf("Monte Carlo line %q, want u 112 µV beside no νeff", got)
	}
	if got := certificate.BudgetFoot(r); got != "U = 230 µV, k = 2.06, symmetric interval" {
		t.Errorf("BudgetFoot = %q", got)
	}
	if got := certificate.BudgetGUMFoot(r); !strings.HasPrefix(got, "GUM U = 230 µV, k = 2.03") {
		t.Errorf("BudgetGUMFoot = %q, want the GUM's U = 2.03·110.9 µV = 225.1 µV stated as 230 µV", got)
	}
	r.Unc.MC = nil // a GUM result: one combined line, its own u
	if rows, _ := certificate.BudgetText(r); len(rows) != 3 || rows[2][4] != "112 µV" {
		t.Errorf("GUM result: %q", rows)
	}
}

// From metrology revision 1 the pooled standard deviation is one Type A
// input, its ν = Σ(nᵢ − 1) counted once (JCGM 100:2008 G.4.1): the budget's
// note says so, and no longer calls repeatability an input per sweep point.
func TestBudgetNotePooledRepeatability(t *testing.T) {
	rec := sampleRecord()
	for i, r := range rec.Results {
		if r.Name == "post_offset" {
			rec.Results[i].Budget = []sequencer.BudgetRow{
				{Name: "repeatability", Kind: "A", InputU: 0.74e-6, InputUnit: "V", Points: 11, U: 0.22e-6, DOF: 77, Share: 1},
			}
		}
	}
	rec.Metrology = 0
	requireText(t, pdfText(t, render(t, rec, opt)), "Repeatability and resolution are one input per sweep point")
	rec.Metrology = 1
	text := pdfText(t, render(t, rec, opt))
	requireText(t, text, "Repeatability is one Type A input, the pooled standard deviation of the readings, with ν = Σ(nᵢ − 1) counted once (JCGM 100 G.4.1)")
	if strings.Contains(text, "Repeatability and resolution are one input per sweep point") {
		t.Error("a revision-1 record's budget note calls repeatability an input per sweep point")
	}
}
