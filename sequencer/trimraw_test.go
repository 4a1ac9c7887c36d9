package sequencer

import (
	"math"
	"testing"
)

// TestCodeUncertaintyOnTheRawLine: under a firmware gain kf the fitted line is
// kf times the raw one. An output offset DAC's code follows the raw intercept
// (b/kf)/lsb, so its uncertainty is the corrected one over |kf|; a before-gain
// offset DAC's code follows intercept/(slope·lsb), where kf cancels, so the same
// unit under kf = 1 and kf = 2 has the same code uncertainty (hand-worked: 5 µV
// on a 100 V/V line at 250 nV per code is 0.2 codes either way).
func TestCodeUncertaintyOnTheRawLine(t *testing.T) {
	before := DAC{Name: "ofs", Adjusts: AdjustOffset, Bits: 12, LSB: 250e-9, NoCorrection: 2048, BeforeGain: true}
	plan := TrimPlan{DACs: []DAC{before}}
	codeU := func(kf float64) float64 {
		var a analysis
		a.sum.Slope, a.sum.Intercept = 100*kf, 0.02*kf
		a.lf.Cov = [2][2]float64{{(5e-6 * kf) * (5e-6 * kf), 0}, {0, (3e-4 * kf) * (3e-4 * kf)}}
		sol, err := ComputeTrim(plan, a.sum.Slope/kf, a.sum.Intercept/kf, []int{2048}, 100, 0)
		if err != nil {
			t.Fatal(err)
		}
		return codeUOnRawLine(before, idealCodeU(plan, a, sol, []int{2048}, math.Sqrt(a.cov()[0][0]))[0], kf)
	}
	if u1, u2 := codeU(1), codeU(2); math.Abs(u1-0.2) > 1e-9 || math.Abs(u2-u1) > 1e-12 {
		t.Errorf("before-gain code u: %.6f codes under kf = 1, %.6f under kf = 2; want 0.2 both", u1, u2)
	}
	after := DAC{Name: "ofs", Adjusts: AdjustOffset, Bits: 12, LSB: 25e-6, NoCorrection: 2048}
	if got := codeUOnRawLine(after, 0.4, 2); got != 0.2 {
		t.Errorf("after-gain code u under kf = 2: %g codes, want 0.4/2", got)
	}
	gain := DAC{Name: "g", Adjusts: AdjustGain, Bits: 12, LSB: 10e-6, NoCorrection: 2048}
	if got := codeUOnRawLine(gain, 0.4, 2); got != 0.4 {
		t.Errorf("gain code u under kf = 2: %g codes, want 0.4", got)
	}
}
