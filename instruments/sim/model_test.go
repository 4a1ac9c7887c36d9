package sim_test

import (
	"fmt"
	"math"
	"reflect"
	"testing"

	"trimline/instruments/sim"
)

func TestClosedLoopGain(t *testing.T) {
	for _, c := range []struct {
		gain, wantPPM float64
	}{
		{50, -5}, // common practice: gain error ≈ −G/A = −50/1e7 = −5 ppm (G = A/(1+Aβ))
		{10, -1}, // common practice: −10/1e7 = −1 ppm
	} {
		g := sim.ClosedLoopGain(1e7, 1/c.gain) // A = 1e7 = 140 dB (common practice)
		errPPM := (g/c.gain - 1) * 1e6
		near(t, fmt.Sprintf("gain error at G = %g (ppm)", c.gain), errPPM, c.wantPPM, 0.1)
	}
	// Textbook limit: infinite open-loop gain gives exactly 1/β.
	if g := sim.ClosedLoopGain(math.Inf(1), 1.0/200); g != 200 {
		t.Errorf("ideal closed-loop gain = %g, want 200", g)
	}
}

func TestDACValue(t *testing.T) {
	var ideal sim.DAC
	for _, c := range []int{0, 1, 2047, 2048, 4095} {
		if v := ideal.Value(c); v != float64(c) {
			t.Errorf("ideal DAC value(%d) = %g", c, v) // hand-worked: an ideal DAC is its code
		}
	}
	stuck := sim.DAC{Stuck: true, StuckBit: 9, StuckHigh: true}
	if v := stuck.Value(2048); v != 2048+512 {
		t.Errorf("bit 9 stuck high: value(2048) = %g, want 2560", v) // hand-worked: 2048 + 2^9
	}
	low := sim.DAC{Stuck: true, StuckBit: 11}
	if v := low.Value(2100); v != 52 {
		t.Errorf("bit 11 stuck low: value(2100) = %g, want 52", v) // hand-worked: 2100 − 2048
	}
	var e sim.DAC
	e.BitError[3] = 0.05
	if v := e.Value(8 + 1); v != 9.05 {
		t.Errorf("bit 3 +0.05 LSB: value(9) = %g, want 9.05", v) // hand-worked: 8.05 + 1
	}
}

func TestParamsDeterministic(t *testing.T) {
	s := sim.DefaultDUTSettings()
	a, b := sim.Params("BRX-000123", 7, s), sim.Params("BRX-000123", 7, s)
	if !reflect.DeepEqual(a, b) {
		t.Fatalf("same serial and seed gave different params:\n%+v\n%+v", a, b)
	}
	if c := sim.Params("BRX-000124", 7, s); c.GainError == a.GainError || c.OutputOffset == a.OutputOffset {
		t.Errorf("different serials gave the same draws: %+v", c)
	}
	if c := sim.Params("BRX-000123", 8, s); c.GainError == a.GainError {
		t.Errorf("different seeds gave the same gain error")
	}
	// An override changes only the overridden value.
	g := -2500e-6
	o := s
	o.GainError = &g
	if c := sim.Params("BRX-000123", 7, o); c.GainError != g || c.OutputOffset != a.OutputOffset {
		t.Errorf("gain_error override disturbed other draws: %+v", c)
	}
	// The settings map and Params agree with what the fixture loads.
	bn := bench(t, nil, nil, map[string]string{"seed": "7"})
	load(t, bn, "BRX-000123")
	if u, ok := bn.DUT().Unit(); !ok || !reflect.DeepEqual(u, a) {
		t.Errorf("loaded unit %+v, Params gave %+v", u, a)
	}
}

func TestParamsStatistics(t *testing.T) {
	s := sim.DefaultDUTSettings()
	const n = 10000
	var offs, gains []float64
	defects := map[sim.Defect]int{}
	for i := range n {
		p := sim.Params(fmt.Sprintf("BRX-%06d", i), 1, s)
		offs = append(offs, p.TotalOffset())
		gains = append(gains, p.GainError)
		if p.Defect != sim.DefectNone {
			defects[p.Defect]++
		}
	}
	// Statistical tolerance: the standard error of a σ estimate from 10 000 samples is
	// σ/√(2n) ≈ 0.7 %, so ±10 % is far outside chance.
	near(t, "offset σ (V)", stddev(offs), 3e-3, 0.3e-3) // brief: σ ≈ 3 mV
	near(t, "gain σ", stddev(gains), 0.004, 0.0004)     // brief: σ ≈ 0.4 %
	total := defects[sim.DefectStuckBit] + defects[sim.DefectNoisy] + defects[sim.DefectOpen]
	// Statistical tolerance: binomial σ = √(0.02·0.98/10 000) = 0.14 %, ±0.6 % ≈ 4σ.
	near(t, "defect fraction", float64(total)/n, 0.02, 0.006) // brief: 2 %
	for _, d := range []sim.Defect{sim.DefectStuckBit, sim.DefectNoisy, sim.DefectOpen} {
		if defects[d] == 0 {
			t.Errorf("no unit with defect %s among %d", d, n)
		}
	}

	s.DefectRate = 0
	for i := range 2000 {
		if p := sim.Params(fmt.Sprintf("BRX-%06d", i), 1, s); p.Defect != sim.DefectNone {
			t.Fatalf("defect_rate 0: unit %s has defect %s", p.Serial, p.Defect)
		}
	}
}

func TestForcedDefects(t *testing.T) {
	s := sim.DefaultDUTSettings()
	s.Defect = sim.DefectNoisy
	if p := sim.Params("A1", 1, s); p.Noise != 40*20e-6 {
		t.Errorf("noisy unit noise = %g V, want 800 µV", p.Noise) // brief: ×40 of 20 µV
	}
	s.Defect = sim.DefectOpen
	if p := sim.Params("A1", 1, s); p.Output(5e-3, 2048, 2048) != 0 {
		t.Errorf("open unit output is not 0 V")
	}
	s.Defect = sim.DefectStuckBit
	for i := range 50 {
		p := sim.Params(fmt.Sprintf("S%d", i), 1, s)
		d := p.OffsetDAC
		if !d.Stuck {
			d = p.GainDAC
		}
		if !d.Stuck || d.StuckBit < 8 || d.StuckBit > 11 || p.OffsetDAC.Stuck == p.GainDAC.Stuck {
			t.Fatalf("stuck_bit unit %s: offset DAC %+v, gain DAC %+v", p.Serial, p.OffsetDAC, p.GainDAC)
		}
	}
}

func TestRails(t *testing.T) {
	s := sim.DefaultDUTSettings()
	s.Defect = sim.DefectNone
	for _, ofs := range []float64{100, 10, 2.6, -2.6, -10, -100} {
		o := ofs
		s.Offset = &o
		p := sim.Params("R1", 1, s)
		for _, x := range []float64{-10e-3, 0, 10e-3} {
			if y := p.Output(x, 0, 4095); y < 0 || y > 5 { // brief: never beyond the 0..5 V rails
				t.Errorf("offset %g V, x %g V: output %g V outside 0..5 V", ofs, x, y)
			}
		}
	}
	// Inside 0.5..4.5 V the compression is < 1 µV (brief): compare with the linear
	// transfer of an ideal unit, hand-worked as 2.5 V + 200·x + offset.
	s = sim.DUTSettings{OffsetLSB: sim.DefaultOffsetLSB, GainLSB: sim.DefaultGainLSB, Defect: sim.DefectNone}
	for _, ofs := range []float64{-2, -1, 0, 1, 2} {
		o := ofs
		s.Offset = &o
		p := sim.Params("R2", 1, s)
		near(t, fmt.Sprintf("output at offset %g V", ofs), p.Output(0, 2048, 2048), 2.5+ofs, 1e-6)
	}
	// Through the bench: a huge offset reads inside the rails.
	b := bench(t, quietSource, quietMeter, with(quietDUT, "offset", "1000V"))
	load(t, b, "R3")
	drive(t, b, 10e-3, 0)
	if y := read1(t, b); y > 5 || y < 4.8 {
		t.Errorf("huge positive offset reads %g V, want within the top knee 4.8..5 V", y)
	}
}

func TestCrossoverStep(t *testing.T) {
	s := sim.DefaultDUTSettings()
	s.Defect, s.DNL = sim.DefectNone, 0
	p := sim.Params("X1", 1, s)
	if math.Abs(p.CrossoverStep) != 1.5e-6 { // brief: 1.5 µV input-referred, random sign
		t.Fatalf("crossover step %g V", p.CrossoverStep)
	}
	// Across +3 mV the output jumps by step·G on top of the 2 µV·G of the input change
	// (hand-worked from core(x) = G·(x + vin_os + step(x))).
	jump := p.Output(3.001e-3, 2048, 2048) - p.Output(2.999e-3, 2048, 2048)
	near(t, "output jump across 3 mV", jump, p.Gain()*(2e-6+p.CrossoverStep), 1e-9)
}
