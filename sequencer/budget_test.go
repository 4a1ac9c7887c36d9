package sequencer_test

import (
	"math"
	"testing"

	"trimline/sequencer"
	"trimline/sequencer/uncertainty"
)

// The demo BRX-200's offset after trim, on paper (the ideal unit, no noise), on
// station TL1: source 20 ppm of reading + 5 ppm of its 100 mV range, meter 30 ppm
// of reading + 4 ppm of its 10 V range. Every spec is rectangular, u = a/√3 (JCGM
// 100 §4.3.7), and the contributions add in quadrature (JCGM 100 §5.1.3, eq.
// (10)):
//
//	source offset  5 ppm × 100 mV = 0.5 µV at the input, × b1 = 200 V/V: 57.7 µV
//	meter gain     30 ppm × b0 = 2.5 V = 75 µV half-width:                43.3 µV
//	meter offset   4 ppm × 10 V = 40 µV half-width:                        23.1 µV
//
// so the source's range term, not the meter's 30 ppm of reading, dominates
// (58 % of the variance); u = 75.8 µV, k·u = 151.6 µV at k = 2. That is the demo
// without its zero check, which replaces the source-offset term by a measurement.
func TestBRX200BudgetOnPaper(t *testing.T) {
	st, _ := demoFiles(t, nil)
	seq, err := sequencer.ParseSequence("brx200-sequence.yaml", []byte(withoutZero(t)), demoReader(t, nil))
	if err != nil {
		t.Fatal(err)
	}
	var post *sequencer.Result
	results := sequencer.PredictResults(st, seq)
	for i, r := range results {
		if r.Name == "post_offset" {
			post = &results[i]
		}
	}
	if post == nil || len(post.Budget) == 0 {
		t.Fatalf("no budget for post_offset on paper: %+v", post)
	}
	sq3 := math.Sqrt(3)
	want := map[string]float64{
		uncertainty.NameSourceOffset: 200 * 0.5e-6 / sq3,
		uncertainty.NameMeterGain:    2.5 * 30e-6 / sq3,
		uncertainty.NameMeterOffset:  40e-6 / sq3,
	}
	top := post.Budget[0]
	var shares, v float64
	for _, r := range post.Budget {
		if r.Share > top.Share {
			top = r
		}
		shares += r.Share
		v += r.U * r.U
		if w, ok := want[r.Name]; ok && math.Abs(r.U-w) > 1e-9*w {
			t.Errorf("%s: u = %.6g V, want %.6g V", r.Name, r.U, w)
		}
	}
	if top.Name != uncertainty.NameSourceOffset || math.Abs(top.Sensitivity+200) > 1e-9 {
		t.Errorf("dominant row %+v, want the source offset with sensitivity −200 V/V", top)
	}
	if math.Abs(top.Share-0.580) > 0.001 {
		t.Errorf("source offset share %.4f, want 0.580", top.Share)
	}
	if math.Abs(shares-1) > 1e-12 {
		t.Errorf("shares sum to %.15f", shares)
	}
	if math.Abs(math.Sqrt(v)-post.Unc.Std) > 1e-9*post.Unc.Std {
		t.Errorf("√Σu_i² = %.9g V, result's u = %.9g V", math.Sqrt(v), post.Unc.Std)
	}
}
