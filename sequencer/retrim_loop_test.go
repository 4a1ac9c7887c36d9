package sequencer

import (
	"math"
	"testing"
)

// The re-trim's choice of codes, pass by pass, against hand-worked steps.
func TestRetrimLoopChoices(t *testing.T) {
	type pass struct {
		code     int
		err      float64
		sens     float64
		measured bool
		within   bool
		next     int
		stuck    bool
	}
	cases := []struct {
		name    string
		nominal float64
		bound   float64
		lo, hi  int
		passes  []pass
	}{
		// Secant (49 − 50)/(95 − 100) = 0.2, 0.02 × nominal: implausible, the nominal
		// 10 stays; next 95 − round(4.9) = 90.
		{"implausible secant", 10, 1, 0, 4095, []pass{
			{100, 50, 10, false, false, 95, false},
			{95, 49, 10, false, false, 90, false},
		}},
		// Secant (60 − 50)/(95 − 100) = −2: the wrong sign, the nominal stays;
		// next 95 − round(6) = 89.
		{"secant of the wrong sign", 10, 1, 0, 4095, []pass{
			{100, 50, 10, false, false, 95, false},
			{95, 60, 10, false, false, 89, false},
		}},
		// Secant (10 − 50)/(95 − 100) = 8, 0.8 × nominal: measured; next 95 − round(1.25) = 94.
		{"plausible secant", 10, 1, 0, 4095, []pass{
			{100, 50, 10, false, false, 95, false},
			{95, 10, 8, true, false, 94, false},
			{94, 0.5, 9.5, true, true, 94, false},
		}},
		// 3 − round(100/10) = −7: clamped to the range's low end, 0.
		{"clamped", 10, 1, 0, 4095, []pass{
			{3, 100, 10, false, false, 0, false},
		}},
		// At the low end with +5: 0 − round(0.5) = −1 → 0, tried; the best code's
		// neighbour that lowers the error is −1, outside the range: stuck.
		{"stuck at the range's end", 10, 1, 0, 4095, []pass{
			{0, 5, 10, false, false, 0, true},
		}},
		// An inverting step (−10 per code): +30 asks for 50 − round(−3) = 53; at 53,
		// +4 (secant (4 − 30)/3 = −8.67, measured) asks for 53 − round(−0.46) = 53,
		// tried: the best's (53, +4) neighbour that lowers the error is 54.
		{"inverting", -10, 1, -2048, 2047, []pass{
			{50, 30, -10, false, false, 53, false},
			{53, 4, -26.0 / 3, true, false, 54, false},
		}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			l := &retrimLoop{nominal: c.nominal, bound: c.bound, lo: c.lo, hi: c.hi}
			for i, p := range c.passes {
				ch := l.add(p.code, p.err)
				if math.Abs(ch.sens-p.sens) > 1e-12 || ch.measured != p.measured || ch.within != p.within || ch.next != p.next || ch.stuck != p.stuck {
					t.Errorf("pass %d: %+v, want sens %g measured %v within %v next %d stuck %v", i+1, ch, p.sens, p.measured, p.within, p.next, p.stuck)
				}
			}
		})
	}
}

func TestRetrimNominalStep(t *testing.T) {
	seq := &Sequence{IdealGain: -200, IdealOffset: 2.5}
	cases := []struct {
		name   string
		d      DAC
		levels []float64
		want   float64
	}{
		// At the output: the LSB.
		{"after gain", DAC{Adjusts: AdjustOffset, LSB: 12.2e-6}, []float64{0}, 12.2e-6},
		// Input-referred: 61 nV × −200 = −12.2 µV per code.
		{"before gain", DAC{Adjusts: AdjustOffset, LSB: 61e-9, BeforeGain: true}, []float64{0}, -12.2e-6},
		// Gain: 10 ppm of the ideal output's distance from the 2.5 V pivot, averaged:
		// levels −10 mV and −5 mV give 2 V and 1 V from it: 10e-6 × 1.5 V = 15 µV.
		{"gain", DAC{Adjusts: AdjustGain, LSB: 10e-6}, []float64{-10e-3, -5e-3}, 15e-6},
	}
	for _, c := range cases {
		if got := nominalStep(c.d, seq, c.levels, 2.5); math.Abs(got-c.want) > 1e-15 {
			t.Errorf("%s: %g V/code, want %g", c.name, got, c.want)
		}
	}
}
