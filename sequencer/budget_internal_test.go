package sequencer

import (
	"math"
	"testing"

	"trimline/instruments/units"
	"trimline/sequencer/uncertainty"
)

// A budget worked by hand for a three-point sweep, y = 2.5 V + 200·x at x =
// −10, 0, +10 mV, every mean with the same Type A u = 3 µV (7 dof) and a 1 µV
// meter resolution, so every point has the same weight: in the intercept b0 each
// point has weight 1/3. Each row's contribution is |c|·u(x) (JCGM 100 §5.1.3,
// eq. (10), the inputs independent) with u = a/√3 for a rectangular spec of
// half-width a (JCGM 100 §4.3.7); c for the shared errors as the package doc of
// sequencer/uncertainty derives them (−b0 for the meter gain, −1 for the meter
// offset, −b1·X0 = 0 for the source gain, −b1 for the source offset).
func TestBudgetByHand(t *testing.T) {
	sq3 := math.Sqrt(3)
	us := uncertainty.Sweep{
		X: []float64{-0.01, 0, 0.01}, Y: []float64{0.5, 2.5, 4.5},
		URandom: []float64{3e-6, 3e-6, 3e-6}, DOFRandom: []float64{7, 7, 7},
		Meter: uncertainty.Spec{OfReading: 30e-6, OfRange: 4e-6, Range: 10}, MeterResolution: 1e-6,
		Source: uncertainty.Spec{OfReading: 20e-6, OfRange: 5e-6, Range: 0.1},
	}
	lf, err := uncertainty.FitLine(us)
	if err != nil {
		t.Fatal(err)
	}
	a := analysis{lf: lf, sw: us}
	rows := a.budget([2]float64{1, 0}, SweepPlan{}, &Sequence{ResponseDim: units.Volt})

	type want struct {
		name, unit   string
		inputU, c, u float64
		points       int
		dof          float64
	}
	wants := []want{
		// Per point: 3 µV each with weight 1/3: √3·(3 µV/3) = √3 µV; 3·7 = 21 dof
		// by Welch–Satterthwaite (JCGM 100 G.2b) over three equal contributions.
		{uncertainty.NameRepeatability, "V", 3e-6, 0, math.Sqrt(3) * 1e-6, 3, 21},
		// Half a count, rectangular: 1 µV/(2√3) per point; √3·(that/3) = 1 µV/6.
		{uncertainty.NameResolution, "V", 1e-6 / (2 * sq3), 0, 1e-6 / 6, 3, math.Inf(1)},
		{uncertainty.NameMeterGain, "1", 30e-6 / sq3, -2.5, 2.5 * 30e-6 / sq3, 0, math.Inf(1)},
		{uncertainty.NameMeterOffset, "V", 40e-6 / sq3, -1, 40e-6 / sq3, 0, math.Inf(1)},
		// Source gain: c = −b1·X0 = 0 with X0 = 0; its input is still listed.
		{uncertainty.NameSourceGain, "1", 20e-6 / sq3, 0, 0, 0, math.Inf(1)},
		// 5 ppm of 100 mV = 0.5 µV at the input, ×200: 100 µV half-width, 57.7 µV.
		{uncertainty.NameSourceOffset, "V", 0.5e-6 / sq3, -200, 100e-6 / sq3, 0, math.Inf(1)},
	}
	if len(rows) != len(wants) {
		t.Fatalf("%d rows, want %d: %+v", len(rows), len(wants), rows)
	}
	near := func(got, want float64) bool {
		return got == want || math.Abs(got-want) <= 1e-9*math.Abs(want)
	}
	var total, shares float64
	for _, w := range wants {
		total += w.u * w.u
	}
	for i, w := range wants {
		r := rows[i]
		if r.Name != w.name || r.InputUnit != w.unit || r.Points != w.points || !near(r.InputU, w.inputU) ||
			!near(r.Sensitivity, w.c) || !near(r.U, w.u) || !near(r.DOF, w.dof) || !near(r.Share, w.u*w.u/total) {
			t.Errorf("row %d = %+v, want %+v (share %.6f)", i, r, w, w.u*w.u/total)
		}
		shares += r.Share
	}
	if math.Abs(shares-1) > 1e-12 {
		t.Errorf("shares sum to %.15f, want 1", shares)
	}
	// The rows are the whole of u(b0): eq. (10) over them gives the fit's own
	// standard uncertainty.
	if u0, _ := lf.StdUnc(); !near(math.Sqrt(total), u0) {
		t.Errorf("√Σu_i² = %.9g, fit's u(b0) = %.9g", math.Sqrt(total), u0)
	}
	// The source offset dominates: 57.7 µV of 72.3 µV.
	if rows[5].Share < 0.5 {
		t.Errorf("source offset share %.3f, want the largest", rows[5].Share)
	}
}

// A measured source offset (a zero check, uncertainty.Sweep.SourceZero) takes
// the spec's place in the budget under the same name, Type A with its dof: the
// budget reads whatever inputs the fit carries.
func TestBudgetCarriesMeasuredSourceOffset(t *testing.T) {
	us := uncertainty.Sweep{
		X: []float64{-0.01, 0, 0.01}, Y: []float64{0.5, 2.5, 4.5},
		URandom: []float64{3e-6, 3e-6, 3e-6}, DOFRandom: []float64{7, 7, 7},
		Source:     uncertainty.Spec{OfRange: 5e-6, Range: 0.1},
		SourceZero: &uncertainty.Measured{U: 0.1e-6, DOF: 15},
	}
	lf, err := uncertainty.FitLine(us)
	if err != nil {
		t.Fatal(err)
	}
	rows := analysis{lf: lf, sw: us}.budget([2]float64{1, 0}, SweepPlan{}, &Sequence{ResponseDim: units.Volt})
	var found bool
	for _, r := range rows {
		if r.Name == uncertainty.NameSourceOffset {
			found = true
			if r.Kind != uncertainty.KindA || r.DOF != 15 || math.Abs(r.U-200*0.1e-6) > 1e-15 {
				t.Errorf("source offset row %+v, want Type A, 15 dof, 20 µV", r)
			}
		}
	}
	if !found {
		t.Errorf("no source offset row in %+v", rows)
	}
}
