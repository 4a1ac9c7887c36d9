package sim_test

import (
	"context"
	"testing"
	"time"
)

// The output watchdog on simulated time: re-armed within its time the output stays
// on; left alone it switches the output off and programs 0 V at the instant its time
// ran out (a reading 1 ns before sees the unit driven, the next sees it at 0 V);
// disarmed or reset it does nothing.
func TestSourceWatchdog(t *testing.T) {
	ctx := context.Background()
	b := bench(t, quietSource, quietMeter, with(quietDUT, "tau", "0s"))
	src, clk := b.Source(), b.Clock()
	load(t, b, "BRX-00001")
	if err := src.ArmWatchdog(ctx, 0); err == nil {
		t.Fatal("a zero watchdog time was accepted")
	}
	drive(t, b, 10e-3, 10*time.Millisecond)
	if err := src.ArmWatchdog(ctx, time.Second); err != nil {
		t.Fatal(err)
	}
	for range 5 { // kept alive: 5 × 900 ms with a re-arm each time
		clk.Sleep(ctx, 900*time.Millisecond)
		if on, _ := src.State(); !on {
			t.Fatal("the output went off although the watchdog was re-armed in time")
		}
		if err := src.ArmWatchdog(ctx, time.Second); err != nil {
			t.Fatal(err)
		}
	}
	clk.Sleep(ctx, time.Second-time.Nanosecond)
	rs, err := b.Meter().Read(ctx, 1) // 20 ms aperture: the time runs out during it
	if err != nil {
		t.Fatal(err)
	}
	if rs[0].Value < 4 {
		t.Fatalf("reading 1 ns before the watchdog ran out is %g V, want the driven output (≈ 4.5 V)", rs[0].Value)
	}
	rs, _ = b.Meter().Read(ctx, 1)
	if rs[0].Value > 2.6 {
		t.Fatalf("reading after the watchdog ran out is %g V, want the output at 0 V input (≈ 2.5 V)", rs[0].Value)
	}
	if on, lvl := src.State(); on || lvl != 0 {
		t.Fatalf("after the watchdog ran out: on=%v level=%g, want off at 0 V", on, lvl)
	}
	if armed, _, trips := src.Watchdog(); armed || trips != 1 {
		t.Fatalf("armed=%v trips=%d, want disarmed after one trip", armed, trips)
	}

	// Disarmed, and after a reset, it does nothing.
	for _, stop := range []func() error{
		func() error { return src.DisarmWatchdog(ctx) },
		func() error { return src.Reset(ctx) },
	} {
		drive(t, b, 5e-3, 0)
		src.ArmWatchdog(ctx, time.Second)
		if err := stop(); err != nil {
			t.Fatal(err)
		}
		if err := src.SetLevel(ctx, 5e-3); err != nil {
			t.Fatal(err)
		}
		src.SetOutput(ctx, true)
		clk.Sleep(ctx, time.Hour)
		if on, lvl := src.State(); !on || lvl != 5e-3 {
			t.Fatalf("a stopped watchdog acted: on=%v level=%g", on, lvl)
		}
		src.SetOutput(ctx, false)
	}
	if _, _, trips := src.Watchdog(); trips != 1 {
		t.Fatalf("trips %d, want still 1", trips)
	}
}
