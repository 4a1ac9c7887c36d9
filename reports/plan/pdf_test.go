package plan_test

import (
	"bytes"
	"context"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"trimline/instruments/budget"
	report "trimline/reports/plan"
	planner "trimline/sequencer/plan"
)

// demoPlan plans a small budget of the demo card against its limit file.
func demoPlan(t *testing.T, trim string) *planner.Report {
	t.Helper()
	lims, err := filepath.Abs(filepath.Join("..", "..", "sequences", "brx200-limits.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	b, err := budget.Parse("card-budget.yaml", []byte(`budget:
  product: BRX-200
  revision: C
  limits: `+lims+`
transfer:
  gain: 200
  output_at_zero: 2.5 V
  input: {low: -10 mV, high: 10 mV}
sources:
  - name: input stage offset
    acts: input_offset
    normal: 10 uV
  - name: output stage offset
    acts: output_offset
    uniform: ±2 mV
  - name: reference
    acts: gain
    tolerance: ±0.2 %
trim:
`+trim))
	if err != nil {
		t.Fatal(err)
	}
	tol, err := planner.LoadTolerances(b.LimitsFile)
	if err != nil {
		t.Fatal(err)
	}
	r, err := planner.Run(context.Background(), b, planner.Options{Seed: 2, TargetYield: 0.995, Tolerances: tol,
		MinTrials: 20000, SearchTrials: 20000})
	if err != nil {
		t.Fatal(err)
	}
	return r
}

const dacs = `  dacs:
    - {name: offset, adjusts: offset, bits: 10, lsb: 12.2 uV, no_correction: 512, dnl: 0.3 LSB}
    - {name: gain, adjusts: gain, bits: 12, lsb: 10 ppm, no_correction: 2048}
`

// The PDF renders (set PLAN_PDF=FILE to keep one and look at it), and the same
// report and date give the same bytes.
func TestPDF(t *testing.T) {
	r := demoPlan(t, dacs)
	when := time.Date(2026, 12, 2, 9, 0, 0, 0, time.UTC)
	var a, b bytes.Buffer
	if err := report.WritePDF(&a, r, when); err != nil {
		t.Fatal(err)
	}
	if err := report.WritePDF(&b, r, when); err != nil {
		t.Fatal(err)
	}
	if !bytes.HasPrefix(a.Bytes(), []byte("%PDF-")) || a.Len() < 20000 {
		t.Fatalf("not a PDF with plots: %d bytes", a.Len())
	}
	if !bytes.Equal(a.Bytes(), b.Bytes()) {
		t.Error("the same report gave different bytes")
	}
	if p := os.Getenv("PLAN_PDF"); p != "" {
		if err := report.WriteFile(p, r, when); err != nil {
			t.Fatal(err)
		}
	}
}

// The text a designer reads: the offset DAC of 10 bits (±6.2 mV) saturates on
// the units whose offset, uniform over ±2 mV at the output plus 2 mV σ from the
// input, lies beyond its range; the recommendation and the yield are there.
func TestText(t *testing.T) {
	r := demoPlan(t, dacs)
	var b bytes.Buffer
	report.WriteText(&b, r)
	out := b.String()
	for _, want := range []string{"Trim plan of BRX-200 rev C", "pre_offset", "law of propagation", "offset, after gain",
		"−6.25 … 6.23 mV", "common practice", "Predicted yield against", "Recommendation for a yield of 99.50 %"} {
		if !strings.Contains(out, want) {
			t.Errorf("text lacks %q:\n%s", want, out)
		}
	}
	if sat := r.DACs[0].Saturation; !(sat > 0.001) || math.IsNaN(r.Yield) {
		t.Errorf("saturation %g, yield %g", sat, r.Yield)
	}
}

// A plan hands --against every quantity it predicts, by the names the ledger
// uses, with the yield over the results it judges and each DAC's saturation.
func TestPredictionOf(t *testing.T) {
	r := demoPlan(t, dacs)
	p := report.PredictionOf(r)
	var names []string
	for _, q := range p.Quantities {
		names = append(names, q.Name)
		if len(q.Values) != r.Trials {
			t.Errorf("%s: %d values, %d trials", q.Name, len(q.Values), r.Trials)
		}
	}
	if got := strings.Join(names, " "); got != "pre_offset pre_gain_error offset_code gain_code post_offset post_gain_error" {
		t.Errorf("quantities %s", got)
	}
	if p.Yield != r.Yield || len(p.YieldOver) != 2 || p.Saturation["offset"] != r.DACs[0].Saturation || p.Product != "BRX-200" {
		t.Errorf("prediction %+v", p)
	}
}

// A quantity no source moves (here the gain error) is drawn as one bar about
// its value, not refused: every unit is alike.
func TestPDFZeroSpread(t *testing.T) {
	b, err := budget.Parse("offset-budget.yaml", []byte(`budget: {product: HW-1, revision: A}
transfer:
  gain: 1
  output_at_zero: 2.5 V
  input: {low: -1 V, high: 1 V}
sources:
  - {name: output offset, acts: output_offset, normal: 1 mV}
trim:
  dacs:
    - {name: offset, adjusts: offset, bits: 6, lsb: 50 uV, no_correction: 32}
`))
	if err != nil {
		t.Fatal(err)
	}
	r, err := planner.Run(context.Background(), b, planner.Options{Seed: 1, MinTrials: 10000})
	if err != nil {
		t.Fatal(err)
	}
	var out bytes.Buffer
	if err := report.WritePDF(&out, r, time.Time{}); err != nil || !bytes.HasPrefix(out.Bytes(), []byte("%PDF-")) {
		t.Fatalf("PDF: %v", err)
	}
}
