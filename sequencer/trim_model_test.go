package sequencer

import (
	"math"
	"math/rand/v2"
	"testing"

	"trimline/sequencer/uncertainty"
)

// ComputeTrim against the transfer model it documents, y = P + g·(core(x) + a·Din − P) + Dout,
// over 2000 random units with coarse and fine DACs of both codings and both
// placements, away from no correction before the sweep: the predicted transfer is
// the model's, and the trimmed errors are within about half the finest LSB.
func TestComputeTrimAgainstTheModel(t *testing.T) {
	dacs := []DAC{
		{Name: "gfine", Adjusts: AdjustGain, Bits: 8, LSB: 2e-6, TwosComplement: true},
		{Name: "gcoarse", Adjusts: AdjustGain, Bits: 10, LSB: 100e-6, NoCorrection: 512},
		{Name: "ofine", Adjusts: AdjustOffset, Bits: 8, LSB: 10e-6, TwosComplement: true},
		{Name: "ocoarse", Adjusts: AdjustOffset, Bits: 12, LSB: 1e-6, NoCorrection: 2048, BeforeGain: true},
	}
	plan := TrimPlan{DACs: dacs, Pivot: 2.5}
	model := func(a, core0 float64, codes []int) (slope, icpt float64) {
		g, din, dout := 1.0, 0.0, 0.0
		for i, d := range dacs {
			switch {
			case d.Adjusts == AdjustGain:
				g *= gainFactor(d, float64(codes[i]))
			case d.BeforeGain:
				din += float64(codes[i]-d.NoCorrection) * d.LSB
			default:
				dout += float64(codes[i]-d.NoCorrection) * d.LSB
			}
		}
		return g * a, 2.5 + g*(core0+a*din-2.5) + dout
	}
	r := rand.New(rand.NewPCG(1, 2))
	worst := 0.0
	for n := 0; n < 2000; n++ {
		a := 200 * (1 + (r.Float64()-0.5)*0.02)
		core0 := 2.5 + (r.Float64()-0.5)*0.004
		before := []int{r.IntN(200) - 100, 512 + r.IntN(200) - 100, r.IntN(200) - 100, 2048 + r.IntN(400) - 200}
		s, i := model(a, core0, before)
		sol, err := ComputeTrim(plan, s, i, before, 200, 2.5)
		if err != nil {
			t.Fatal(err)
		}
		codes := make([]int, len(dacs))
		for k, c := range sol.Codes {
			if c.Saturated {
				t.Fatalf("saturated %+v", sol)
			}
			codes[k] = c.Code
		}
		s2, i2 := model(a, core0, codes)
		if math.Abs(s2-sol.PredSlope) > 1e-9 || math.Abs(i2-sol.PredIntercept) > 1e-9 {
			t.Fatalf("prediction off: %g %g vs %g %g", s2, i2, sol.PredSlope, sol.PredIntercept)
		}
		// After trim the errors are within about half an LSB of the finest DAC.
		ge := math.Abs(s2/200 - 1)
		oe := math.Abs(i2 - 2.5)
		if ge > 1.5e-6 || oe > 6e-6 {
			t.Errorf("case %d: gain error %.3g, offset error %.3g", n, ge, oe)
		}
		worst = math.Max(worst, oe)
	}
	t.Logf("worst offset error %.3g V", worst)
}

// idealCodeU against a central difference of ComputeTrim's exact code, for a gain
// DAC that held a code away from no-correction before the sweep (no clear_trim, or
// a retest).
func TestIdealCodeUAgainstADifference(t *testing.T) {
	gain := DAC{Name: "gain", Adjusts: AdjustGain, Bits: 12, LSB: 10e-6, NoCorrection: 2048}
	off := DAC{Name: "offset", Adjusts: AdjustOffset, Bits: 12, LSB: 12.2e-6, NoCorrection: 2048}
	plan := TrimPlan{DACs: []DAC{gain, off}, Pivot: 2.5}
	for _, beforeGain := range []int{2048, 2048 + 2000, 2048 - 2000} {
		before := []int{beforeGain, 2048}
		g0 := gainFactor(gain, float64(beforeGain))
		slope, icpt := 200*g0*(1+0.004), 2.5+1e-3
		u1, u0 := 0.002, 20e-6
		sol, err := ComputeTrim(plan, slope, icpt, before, 200, 2.5)
		if err != nil {
			t.Fatal(err)
		}
		a := analysis{sum: FitSummary{Slope: slope, Intercept: icpt}, lf: uncertainty.LineFit{Cov: [2][2]float64{{u0 * u0, 0}, {0, u1 * u1}}}}
		got := idealCodeU(plan, a, sol, before, u0)
		h := 1e-6
		p, _ := ComputeTrim(plan, slope+h, icpt, before, 200, 2.5)
		m, _ := ComputeTrim(plan, slope-h, icpt, before, 200, 2.5)
		want := math.Abs((p.Codes[0].Ideal-m.Codes[0].Ideal)/(2*h)) * u1
		t.Logf("before %d (g0 %.3f): idealCodeU gain %.4f codes, by difference %.4f codes (ratio %.4f)", beforeGain, g0, got[0], want, got[0]/want)
		if math.Abs(got[0]/want-1) > 1e-3 {
			t.Errorf("before %d: gain IdealU %.5g, want %.5g", beforeGain, got[0], want)
		}
	}
}
