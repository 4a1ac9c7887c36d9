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
		DACs: []sequencer.DAC{
			{Name: "gain", Adjusts: sequencer.AdjustGain, Bits: 12, LSB: 10e-6, NoCorrection: 2048},
			{Name: "offset", Adjusts: sequencer.AdjustOffset, Bits: 12, LSB: 12.2e-6, NoCorrection: 2048},
		},
		Pivot: 2.5,
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
			p.DACs[1].BeforeGain = true
			p.DACs[1].LSB = 61e-9
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
			s, err := sequencer.ComputeTrim(c.plan(), c.slope, c.intercept, []int{c.g0, c.o0}, 200, 2.5)
			if err != nil {
				t.Fatal(err)
			}
			g, o := s.Codes[0], s.Codes[1]
			near(t, "gain ideal", g.Ideal, c.gainIdeal, 1e-6)
			near(t, "offset ideal", o.Ideal, c.offIdeal, 1e-6)
			if g.Code != c.gain || o.Code != c.off || g.Saturated != c.gainSat || o.Saturated != c.offSat {
				t.Errorf("codes gain %d (sat %v) offset %d (sat %v), want %d (%v) %d (%v)", g.Code, g.Saturated, o.Code, o.Saturated, c.gain, c.gainSat, c.off, c.offSat)
			}
			near(t, "predicted slope", s.PredSlope, c.predSlope, 1e-9)
			near(t, "predicted intercept", s.PredIntercept, c.predInter, 1e-9)
		})
	}
}

func TestComputeTrimRejectsDeadOutput(t *testing.T) {
	// An open output reads a flat line: no code can fix it, and the engine must say so.
	for _, slope := range []float64{0, -200, math.NaN()} {
		if _, err := sequencer.ComputeTrim(demoTrim(), slope, 0, []int{2048, 2048}, 200, 2.5); err == nil {
			t.Errorf("slope %g: no error", slope)
		}
	}
}

// An offset-only trim leaves the gain alone: the code corrects the intercept with
// the unit's own slope. Hand-worked: slope 199.5, intercept 2.5031 V, 12-bit
// offset DAC of 12.2 µV at the output: code = 2048 − 0.0031/12.2e-6 = 2048 −
// 254.0984 = 1793.9016 → 1794; predicted intercept 2.5031 − 254·12.2e-6 = 2.5000012.
func TestComputeTrimOffsetOnly(t *testing.T) {
	p := demoTrim()
	p.DACs = p.DACs[1:]
	s, err := sequencer.ComputeTrim(p, 199.5, 2.5031, []int{2048}, 200, 2.5)
	if err != nil {
		t.Fatal(err)
	}
	near(t, "offset ideal", s.Codes[0].Ideal, 2048-0.0031/12.2e-6, 1e-9)
	if s.Codes[0].Code != 1794 {
		t.Errorf("code %d, want 1794", s.Codes[0].Code)
	}
	near(t, "predicted slope", s.PredSlope, 199.5, 1e-12)
	near(t, "predicted intercept", s.PredIntercept, 2.5031-254*12.2e-6, 1e-12)
}

// A coarse and a fine offset DAC: the coarse one (larger step) is solved and
// rounded first, the fine one takes up the rest. Hand-worked: 3.1 mV to remove,
// coarse 100 µV/code → −31 codes (−3.1 mV exactly), fine 1 µV/code → 0 left;
// with 3.15 mV: coarse −31.5 → −32 (rounds half away from zero) leaves +50 µV
// for the fine DAC → +50 codes.
func TestComputeTrimCoarseAndFine(t *testing.T) {
	p := sequencer.TrimPlan{Pivot: 2.5, DACs: []sequencer.DAC{
		{Name: "fine", Adjusts: sequencer.AdjustOffset, Bits: 8, LSB: 1e-6, TwosComplement: true},
		{Name: "coarse", Adjusts: sequencer.AdjustOffset, Bits: 8, LSB: 100e-6, TwosComplement: true},
	}}
	s, err := sequencer.ComputeTrim(p, 200, 2.50315, []int{0, 0}, 200, 2.5)
	if err != nil {
		t.Fatal(err)
	}
	if s.Codes[1].Code != -32 || s.Codes[0].Code != 50 {
		t.Errorf("coarse %d fine %d, want −32 and 50", s.Codes[1].Code, s.Codes[0].Code)
	}
	near(t, "predicted intercept", s.PredIntercept, 2.5, 1e-12)
	// Saturation of a signed DAC: −200 codes do not fit in 8 bits (−128..127).
	s, _ = sequencer.ComputeTrim(sequencer.TrimPlan{Pivot: 2.5, DACs: p.DACs[1:]}, 200, 2.52, []int{0}, 200, 2.5)
	if !s.Codes[0].Saturated || s.Codes[0].Code != -128 {
		t.Errorf("signed DAC: code %d saturated %v, want −128 true", s.Codes[0].Code, s.Codes[0].Saturated)
	}
}

// Codes travel as the port writes them: decimal, or hex of the DAC's width (a
// two's-complement code as its bit pattern), and read back the same way.
func TestDACWords(t *testing.T) {
	for _, c := range []struct {
		dac  sequencer.DAC
		code int
		word string
	}{
		{sequencer.DAC{Bits: 12}, 2048, "2048"},
		{sequencer.DAC{Bits: 12, Hex: true}, 2048, "800"},
		{sequencer.DAC{Bits: 16, Hex: true, TwosComplement: true}, -1, "FFFF"},
		{sequencer.DAC{Bits: 16, Hex: true, TwosComplement: true}, -32768, "8000"},
		{sequencer.DAC{Bits: 10, Hex: true, TwosComplement: true}, 5, "005"},
		{sequencer.DAC{Bits: 8, TwosComplement: true}, -7, "-7"},
	} {
		if got := c.dac.Word(c.code); got != c.word {
			t.Errorf("Word(%d) = %q, want %q", c.code, got, c.word)
		}
		for _, reply := range []string{c.word, " " + c.word + "\r", "0x" + c.word} {
			if c.dac.Hex == false && reply[0] == '0' && len(reply) > 1 && reply[1] == 'x' {
				continue
			}
			if got, err := c.dac.ParseWord(reply); err != nil || got != c.code {
				t.Errorf("ParseWord(%q) = %d, %v; want %d", reply, got, err, c.code)
			}
		}
	}
	for _, bad := range []string{"4096", "-1", "x", ""} {
		if _, err := (sequencer.DAC{Bits: 12}).ParseWord(bad); err == nil {
			t.Errorf("ParseWord(%q) accepted", bad)
		}
	}
	if _, err := (sequencer.DAC{Bits: 12, Hex: true}).ParseWord("1000"); err == nil {
		t.Error("a 13-bit hex word accepted for a 12-bit DAC")
	}
}
