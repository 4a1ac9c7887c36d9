package sim_test

import (
	"context"
	"testing"

	"trimline/instruments"
	"trimline/instruments/conformance"
	"trimline/instruments/sim"
)

// openBench opens a wired bench (with a unit in the fixture) for one subtest.
func openBench(t *testing.T, extra ...string) *sim.Bench {
	t.Helper()
	b := bench(t, with(nil, extra...), with(quietMeter, extra...), with(quietDUT, extra...))
	load(t, b, "BRX-000001")
	return b
}

var simHooks = conformance.Hooks{OutOfRange: 1, BadRange: 5000}

func TestConformanceSimulatedTime(t *testing.T) {
	t.Run("source", func(t *testing.T) {
		conformance.Source(t, func(t *testing.T) instruments.Source { return openBench(t).Source() }, simHooks)
	})
	t.Run("current source", func(t *testing.T) {
		conformance.CurrentSource(t, func(t *testing.T) instruments.Source { return openBench(t).Source() }, simHooks)
	})
	t.Run("meter", func(t *testing.T) {
		conformance.Meter(t, func(t *testing.T) instruments.Meter { return openBench(t).Meter() }, simHooks)
	})
	t.Run("dut", func(t *testing.T) {
		conformance.TrimPort(t, func(t *testing.T) instruments.TrimPort { return openBench(t).DUT() }, simHooks)
	})
	t.Run("switch", func(t *testing.T) {
		conformance.Switch(t, func(t *testing.T) instruments.Switch {
			return switchBench(t, quietMeter, with(quietDUT, "channels", "4")).Switch()
		}, simHooks)
	})
	t.Run("chamber", func(t *testing.T) {
		h := simHooks
		h.BadSetPoint = 200
		conformance.Thermal(t, func(t *testing.T) instruments.Thermal {
			return chamberBench(t, nil, quietDUT).Chamber()
		}, h)
	})
}

// TestConformanceRealTime runs the meter suite with time: real, where a long read
// really takes its apertures, so the cancel subtest cancels a read in progress.
func TestConformanceRealTime(t *testing.T) {
	conformance.Meter(t, func(t *testing.T) instruments.Meter { return openBench(t, "time", "real").Meter() }, simHooks)
}

func TestLid(t *testing.T) {
	ctx := context.Background()
	b := bench(t, nil, nil, quietDUT)
	d := b.DUT()
	for _, want := range []string{"CLOSED", "OPEN", "CLOSED"} {
		// LID? answers with or without a unit: the lid is the fixture's.
		if got, err := d.Query(ctx, "LID?"); err != nil || got != want {
			t.Fatalf("LID? = %q, %v; want %q", got, err, want)
		}
		d.SetLid(want == "CLOSED")
	}
	open := bench(t, nil, nil, with(quietDUT, "lid", "open"))
	if got, err := open.DUT().Query(ctx, "LID?"); err != nil || got != "OPEN" || !open.DUT().LidOpen() {
		t.Fatalf("lid: open: LID? = %q, %v; want OPEN", got, err)
	}
	if _, err := sim.ParseDUTSettings(map[string]string{"lid": "ajar"}); err == nil {
		t.Fatal("lid: ajar accepted")
	}
	if err := (sim.Driver{}).CheckSettings(instruments.Spec{Address: "sim://meter", Settings: map[string]string{"lid": "open"}}); err == nil {
		t.Fatal("lid on the meter accepted")
	}
}
