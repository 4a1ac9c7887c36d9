package sim_test

import (
	"context"
	"maps"
	"math"
	"testing"
	"time"

	"trimline/instruments"
	"trimline/instruments/sim"
)

// quietSource, quietMeter and quietDUT are settings with every error and noise off,
// so a test can hand-compute each reading.
var (
	quietSource = map[string]string{"noise": "0V", "gain_error": "0", "offset": "0V", "thermal_emf": "0V"}
	quietMeter  = map[string]string{"noise": "0V", "gain_error": "0", "offset": "0V"}
	quietDUT    = map[string]string{"offset": "3.1mV", "gain_error": "-2500 ppm", "noise": "0V",
		"crossover_step": "0uV", "dnl": "0", "defect": "none"}
)

// with returns base with the extra settings added (extra wins).
func with(base map[string]string, extra ...string) map[string]string {
	m := maps.Clone(base)
	if m == nil {
		m = map[string]string{}
	}
	for i := 0; i+1 < len(extra); i += 2 {
		m[extra[i]] = extra[i+1]
	}
	return m
}

// bench opens a wired bench; a nil settings map leaves that instrument out.
func bench(t *testing.T, source, meter, dut map[string]string) *sim.Bench {
	t.Helper()
	var specs []instruments.Spec
	if source != nil {
		specs = append(specs, instruments.Spec{Role: "source", Address: "sim://source", Settings: source})
	}
	if meter != nil {
		specs = append(specs, instruments.Spec{Role: "meter", Address: "sim://meter", Settings: meter})
	}
	if dut != nil {
		specs = append(specs, instruments.Spec{Role: "dut", Address: "sim://dut", Settings: dut})
	}
	b, err := sim.NewBench(specs)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { b.Close() })
	return b
}

// drive switches the source on at level x (V) and waits settle on the bench clock.
func drive(t *testing.T, b *sim.Bench, x float64, settle time.Duration) {
	t.Helper()
	ctx := context.Background()
	if err := b.Source().SetLevel(ctx, x); err != nil {
		t.Fatal(err)
	}
	if err := b.Source().SetOutput(ctx, true); err != nil {
		t.Fatal(err)
	}
	if err := b.Clock().Sleep(ctx, settle); err != nil {
		t.Fatal(err)
	}
}

// read1 takes one valid reading.
func read1(t *testing.T, b *sim.Bench) float64 {
	t.Helper()
	rs, err := b.Meter().Read(context.Background(), 1)
	if err != nil {
		t.Fatal(err)
	}
	if len(rs) != 1 || !rs[0].Valid() {
		t.Fatalf("reading %+v is not one valid reading", rs)
	}
	return rs[0].Value
}

func load(t *testing.T, b *sim.Bench, serial string) {
	t.Helper()
	if err := b.DUT().LoadUnit(context.Background(), serial); err != nil {
		t.Fatal(err)
	}
}

func command(t *testing.T, d *sim.DUT, line string) {
	t.Helper()
	if err := d.Command(context.Background(), line); err != nil {
		t.Fatal(err)
	}
}

func near(t *testing.T, what string, got, want, tol float64) {
	t.Helper()
	if math.Abs(got-want) > tol {
		t.Errorf("%s = %.10g, want %.10g ± %.3g (off by %.3g)", what, got, want, tol, got-want)
	}
}

// stddev returns the sample standard deviation of v.
func stddev(v []float64) float64 {
	var m float64
	for _, x := range v {
		m += x
	}
	m /= float64(len(v))
	var s float64
	for _, x := range v {
		s += (x - m) * (x - m)
	}
	return math.Sqrt(s / float64(len(v)-1))
}
