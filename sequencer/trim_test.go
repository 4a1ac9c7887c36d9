package sequencer_test

import (
	"math"
	"testing"

	"trimline/sequencer"
)

// demoTrim is the BRX-200's trim definition: 12-bit DACs, mid-scale = no correction,
// gain 10 ppm per code about a 2.5 V pivot, offset 12.2 µV per code at the output.
func demoTrim() sequencer.TrimPlan {
	return sequencer.TrimPlan{
		Gain:      sequencer.DAC{Bits: 12, LSB: 10e-6, NoCorrection: 2048},
		Offset:    sequencer.DAC{Bits: 12, LSB: 12.2e-6, NoCorrection: 2048},
		GainPivot: 2.5,
	}
}

func near(t *testing.T, what string, got, want, tol float64) {
	t.Helper()
	if math.Abs(got-want) > tol {
		t.Errorf("%s = %.10g, want %.10g (±%g)", what, got, want, tol)
	}
}

func TestComputeTrimHandWorked(t *testing.T) {
	// Hand-worked: a unit with gain error −2500 ppm and +3.1 mV output offset,
	// measured with both DACs at no correction (2048):
	//   slope a = 200·(1 − 0.0025) = 199.5 V/V, intercept b = 2.5031 V.
	//   gain code = 2048 + (200/199.5 − 1)/10e-6 = 2048 + 250.6266 = 2298.6266 → 2299
	//   g1 = 1 + 251·10e-6 = 1.00251
	//   offset code = 2048 + (2.5 − 2.5 − 1.00251·0.0031)/12.2e-6 = 2048 − 254.7361 = 1793.2639 → 1793
	//   predicted slope = 199.5·1.00251 = 200.000745; intercept = 2.5 + 0.003107781 − 255·12.2e-6 = 2.499996781 V
	cases := []struct {
		name                 string
		plan                 func() sequencer.TrimPlan
		slope, intercept     float64
		g0, o0               int
		gainIdeal, offIdeal  float64
		gain, off            int
		gainSat, offSat      bool
		predSlope, predInter float64
	}{
		{"after gain stage", demoTrim, 199.5, 2.5031, 2048, 2048, 2298.6265664, 1793.2638525, 2299, 1793, false, false, 200.000745, 2.499996781},
		{"before gain stage", func() sequencer.TrimPlan {
			// Hand-worked: the same unit with the offset DAC at the input, LSB 61 nV
			// input-referred (12.2 µV / 200): offset code = 2048 − 0.0031/1.00251/(199.5·61e-9)
			// = 2048 − 254.7352 = 1793.2648 → 1793.
			p := demoTrim()
			p.OffsetBeforeGain = true
			p.Offset.LSB = 61e-9
			return p
		}, 199.5, 2.5031, 2048, 2048, 2298.6265664, 1793.2648013, 2299, 1793, false, false, 200.000745, 2.5 + 1.00251*(0.0031-199.5*255*61e-9)},
		// Hand-worked: measured with the gain DAC at 2100 and the offset DAC at 2000,
		// the same unit reads slope 199.5·1.00052 = 199.60374 and intercept
		// 2.5 + 1.00052·0.0031 − 48·12.2e-6 = 2.502516012 V: the codes the unit needs are
		// the same as from no correction.
		{"from non-neutral codes", demoTrim, 199.60374, 2.502516012, 2100, 2000, 2298.6265664, 1793.2638525, 2299, 1793, false, false, 200.000745, 2.499996781},
		// Hand-worked saturation: +30 mV offset needs 2048 − 0.03·1.00251/12.2e-6 ≈ −417 → clamps to 0.
		{"offset saturates low", demoTrim, 199.5, 2.53, 2048, 2048, 2298.6265664, 2048 - 0.03*1.00251/12.2e-6, 2299, 0, false, true, 200.000745, 2.5 + 1.00251*0.03 - 2048*12.2e-6},
		// Hand-worked saturation: gain error +3 % needs 2048 + (1/1.03 − 1)/1e-5 = 2048 − 2912.6 → clamps to 0.
		{"gain saturates", demoTrim, 206, 2.5, 2048, 2048, 2048 + (200.0/206-1)/10e-6, 2048, 0, 2048, true, false, 206 * (1 - 2048*10e-6), 2.5},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s, err := sequencer.ComputeTrim(c.plan(), c.slope, c.intercept, c.g0, c.o0, 200, 2.5)
			if err != nil {
				t.Fatal(err)
			}
			near(t, "gain ideal", s.GainIdeal, c.gainIdeal, 1e-6)
			near(t, "offset ideal", s.OffsetIdeal, c.offIdeal, 1e-6)
			if s.Gain != c.gain || s.Offset != c.off || s.GainSat != c.gainSat || s.OffsetSat != c.offSat {
				t.Errorf("codes gain %d (sat %v) offset %d (sat %v), want %d (%v) %d (%v)", s.Gain, s.GainSat, s.Offset, s.OffsetSat, c.gain, c.gainSat, c.off, c.offSat)
			}
			near(t, "predicted slope", s.PredSlope, c.predSlope, 1e-9)
			near(t, "predicted intercept", s.PredIntercept, c.predInter, 1e-9)
		})
	}
}

func TestComputeTrimRejectsDeadOutput(t *testing.T) {
	// An open output reads a flat line: no code can fix it, and the engine must say so.
	for _, slope := range []float64{0, -200, math.NaN()} {
		if _, err := sequencer.ComputeTrim(demoTrim(), slope, 0, 2048, 2048, 200, 2.5); err == nil {
			t.Errorf("slope %g: no error", slope)
		}
	}
}
