package sim_test

import (
	"context"
	"math"
	"testing"
	"time"

	"trimline/instruments"
	"trimline/instruments/sim"
)

// chamberBench opens a bench of a chamber (settings ch) and, if dut is non-nil, a
// DUT, on simulated time.
func chamberBench(t *testing.T, ch, dut map[string]string) *sim.Bench {
	t.Helper()
	specs := []instruments.Spec{{Role: "chamber", Address: "sim://chamber", Settings: ch}}
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

func sleep(t *testing.T, b *sim.Bench, d time.Duration) {
	t.Helper()
	if err := b.Clock().Sleep(context.Background(), d); err != nil {
		t.Fatal(err)
	}
}

func seconds(s float64) time.Duration { return time.Duration(math.Round(s * 1e9)) }

// TestDamping: ζ = −ln Mp/√(π² + ln² Mp); for Mp = 0.08, ln 0.08 = −2.5257,
// √(9.8696 + 6.3793) = 4.0310, ζ = 0.62658.
func TestDamping(t *testing.T) {
	if z := sim.Damping(0.08); math.Abs(z-0.62658) > 1e-4 {
		t.Fatalf("Damping(0.08) = %.5f, want 0.62658", z)
	}
}

// TestChamberStep: 25 → 85 °C with tau 90 s and 8 % overshoot. The envelope decays
// as e^{−t/τ}; the damped frequency is ωd = (1/τ)·√(1−ζ²)/ζ, the peak comes at
// tp = π/ωd and is 85 + 0.08·60 = 89.8 °C. Within 0.5 °C from 6τ on: the envelope
// there is 60/√(1−ζ²)·e^{−6} = 60/0.7793·0.00248 = 0.19 °C.
func TestChamberStep(t *testing.T) {
	ctx := context.Background()
	b := chamberBench(t, map[string]string{"noise": "0 °C", "start": "2030-01-01T00:00:00Z"}, nil)
	c := b.Chamber()
	if got, err := c.Temperature(ctx); err != nil || got != 25 {
		t.Fatalf("power-on temperature = %v, %v; want 25 °C (ambient, noise off)", got, err)
	}
	if err := c.SetTemperature(ctx, 85); err != nil {
		t.Fatal(err)
	}
	z := sim.Damping(0.08)
	tau := 90.0
	wd := math.Sqrt(1-z*z) / z / tau
	tp := math.Pi / wd
	peak := 0.0
	for s := 0.0; s < 20*tau; s++ {
		tc, _ := c.True()
		peak = max(peak, tc)
		if s >= 6*tau && math.Abs(tc-85) > 0.5 {
			t.Fatalf("at %g s (%.1f τ): %.3f °C, not within 0.5 °C of 85 °C", s, s/tau, tc)
		}
		sleep(t, b, time.Second)
	}
	if math.Abs(peak-89.8) > 0.01 {
		t.Fatalf("peak %.4f °C, want 85 + 0.08·60 = 89.8 °C", peak)
	}
	// The peak itself, at tp after a fresh step 85 → 25 (an undershoot of 4.8 °C).
	if err := c.SetTemperature(ctx, 25); err != nil {
		t.Fatal(err)
	}
	// The chamber was still 85 ± 1e-7 °C away; the step is 60 °C.
	sleep(t, b, seconds(tp))
	if tc, _ := c.True(); math.Abs(tc-(25-4.8)) > 1e-6 {
		t.Fatalf("undershoot at tp = %.1f s: %.7f °C, want 20.2 °C", tp, tc)
	}
}

// TestChamberStable: after a 60 °C step the envelope 60/√(1−ζ²)·e^{−t/τ} falls to
// the 0.3 °C band at t = τ·ln(60/(0.7793·0.3)) = 5.55 τ.
func TestChamberStable(t *testing.T) {
	ctx := context.Background()
	b := chamberBench(t, map[string]string{"noise": "0 °C"}, nil)
	c := b.Chamber()
	if ok, err := c.Stable(ctx); err != nil || !ok {
		t.Fatalf("at rest: Stable = %v, %v; want true", ok, err)
	}
	c.SetTemperature(ctx, 85)
	sleep(t, b, 5*90*time.Second)
	if ok, _ := c.Stable(ctx); ok {
		t.Fatal("stable at 5 τ, envelope 77·e^−5 = 0.52 °C > 0.3 °C band")
	}
	sleep(t, b, 60*time.Second) // 5.67 τ
	if ok, _ := c.Stable(ctx); !ok {
		t.Fatal("not stable at 5.67 τ, envelope 77·e^−5.67 = 0.27 °C < 0.3 °C band")
	}
}

func TestChamberRefusesAndNoise(t *testing.T) {
	ctx := context.Background()
	b := chamberBench(t, map[string]string{"max": "100 °C", "min": "-10 °C"}, nil)
	c := b.Chamber()
	for _, sp := range []float64{100.5, -10.5, math.NaN()} {
		if err := c.SetTemperature(ctx, sp); err == nil {
			t.Fatalf("set point %g accepted outside -10..100 °C", sp)
		}
	}
	if c.SetPoint() != 25 {
		t.Fatalf("set point %g after refusals, want 25", c.SetPoint())
	}
	// Noise 0.05 °C rms: the sample SD of 2000 reads at rest is inside 0.05 ± 10 %
	// (its relative standard error is 1/√(2·2000) = 1.6 %).
	var sum, sq float64
	const n = 2000
	for range n {
		v, err := c.Temperature(ctx)
		if err != nil {
			t.Fatal(err)
		}
		sum += v
		sq += v * v
	}
	mean := sum / n
	sd := math.Sqrt((sq - n*mean*mean) / (n - 1))
	if math.Abs(sd-0.05) > 0.005 || math.Abs(mean-25) > 0.01 {
		t.Fatalf("reads at rest: mean %.4f SD %.4f, want 25 and 0.05", mean, sd)
	}
	// Closed, the set point can still go to a safe temperature.
	c.Close()
	if err := c.SetTemperature(ctx, 25); err != nil {
		t.Fatalf("after Close: %v", err)
	}
	if _, err := c.Temperature(ctx); err == nil {
		t.Fatal("read after Close")
	}
}

func TestChamberSettings(t *testing.T) {
	for _, kv := range [][2]string{{"overshoot", "0"}, {"overshoot", "1.2"}, {"tau", "0 s"},
		{"min", "50 °C"}, {"ambient", "200 °C"}, {"noise", "-1 °C"}, {"gain", "2"}} {
		err := sim.Driver{}.CheckSettings(instruments.Spec{Address: "sim://chamber", Settings: map[string]string{kv[0]: kv[1]}})
		if err == nil {
			t.Errorf("%s: %s accepted", kv[0], kv[1])
		}
	}
	for _, v := range []string{"0.08", "8 %"} {
		if err := (sim.Driver{}).CheckSettings(instruments.Spec{Address: "sim://chamber", Settings: map[string]string{"overshoot": v}}); err != nil {
			t.Errorf("overshoot %s: %v", v, err)
		}
	}
}

// TestDUTLag: a chamber with a 1 ms time constant is a step for the unit, whose
// temperature then follows 25 + 60·(1 − e^{−t/60 s}): 62.927 °C after 60 s.
func TestDUTLag(t *testing.T) {
	ctx := context.Background()
	b := chamberBench(t, map[string]string{"tau": "1 ms", "noise": "0 °C"}, quietDUT)
	c := b.Chamber()
	c.SetTemperature(ctx, 85)
	sleep(t, b, 60*time.Second)
	tc, td := c.True()
	if want := 25 + 60*(1-math.Exp(-1)); math.Abs(td-want) > 1e-3 || math.Abs(tc-85) > 1e-9 {
		t.Fatalf("after 60 s: chamber %.4f, unit %.4f °C; want 85 and %.4f", tc, td, want)
	}
}
