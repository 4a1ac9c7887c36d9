package sim_test

import (
	"context"
	"math"
	"testing"
	"time"
)

// What a zero check sees on the simulated bench: with the output off the fixture
// relay shorts the DUT input (a true 0 V); programmed to 0 with the output on, the
// DUT input is the source's own offset plus the wiring's thermal EMF. The
// difference of the two outputs is the unit's gain times that sum, hand-worked
// from the settings.
func TestZeroInputOffAndOn(t *testing.T) {
	const o, e = 0.3e-6, -0.2e-6 // V: source offset and thermal EMF
	b := bench(t, with(quietSource, "offset", "0.3uV", "thermal_emf", "-0.2uV"), quietMeter, quietDUT)
	load(t, b, "Z1")
	ctx := context.Background()
	if err := b.Source().SetLevel(ctx, 0); err != nil {
		t.Fatal(err)
	}
	b.Clock().Sleep(ctx, 50*time.Millisecond)
	off := read1(t, b)
	drive(t, b, 0, 50*time.Millisecond)
	on := read1(t, b)
	p, _ := b.DUT().Unit()
	near(t, "output with the input shorted", off, p.Output(0, 2048, 2048), 1e-6)
	near(t, "output at a programmed 0", on, p.Output(o+e, 2048, 2048), 1e-6)
	if got, want := b.Source().ThermalEMF(), e; got != want {
		t.Errorf("ThermalEMF() = %g, want %g (the setting)", got, want)
	}
}

// Drawn per bench: the thermal EMF lies inside ±60 % of 500 nV, the source offset
// inside ±60 % of its range spec (5 ppm of 100 mV), both the same for one seed and
// not all equal across seeds.
func TestThermalEMFDrawnPerSeed(t *testing.T) {
	seen := map[float64]bool{}
	for _, seed := range []string{"1", "2", "3", "8"} {
		b := bench(t, map[string]string{"seed": seed}, nil, nil)
		again := bench(t, map[string]string{"seed": seed}, nil, nil)
		e := b.Source().ThermalEMF()
		_, o := b.Source().Errors()
		if math.Abs(e) > 0.6*500e-9 || math.Abs(o) > 0.6*5e-6*0.1 {
			t.Errorf("seed %s: thermal EMF %g V, offset %g V: outside the drawn bands", seed, e, o)
		}
		if e2 := again.Source().ThermalEMF(); e2 != e {
			t.Errorf("seed %s: thermal EMF %g then %g: not one per seed", seed, e, e2)
		}
		seen[e] = true
	}
	if len(seen) < 2 {
		t.Error("every seed drew the same thermal EMF")
	}
}
