package generic_test

import (
	"slices"
	"testing"

	"trimline/instruments"
	"trimline/instruments/generic"
	"trimline/instruments/sim/serve"
)

// A source opened as kind current_source drives a current on the served
// simulator: current mode is selected once (SOUR:FUNC CURR), before the first
// SOUR:CURR, and again after a reset (which leaves the source in voltage mode);
// the compliance voltage is programmed with SOUR:VOLT:PROT. Opened as a
// voltage_source the same instrument is no current source.
func TestCurrentSourceTemplates(t *testing.T) {
	srv := start(t, "tcp", serve.Options{})
	in := openKind(t, srv, "source", instruments.KindCurrentSource)
	cs, ok := in.(*generic.CurrentSource)
	if !ok {
		t.Fatalf("opened a %T, want *generic.CurrentSource", in)
	}
	ctx := ctxT(t)
	if err := cs.SetVoltageLimit(ctx, 12); err != nil {
		t.Fatal(err)
	}
	for _, a := range []float64{4e-3, 8e-3} {
		if err := cs.SetCurrent(ctx, a); err != nil {
			t.Fatal(err)
		}
	}
	if err := cs.SetOutput(ctx, true); err != nil {
		t.Fatal(err)
	}
	sim := srv.Bench().Source()
	if current, amps, limit := sim.CurrentState(); !current || amps != 8e-3 || limit != 12 {
		t.Errorf("bench source: current mode %v, %g A, compliance %g V; want current mode, 8 mA, 12 V", current, amps, limit)
	}
	got := srv.Received("source")
	fn, first := slices.Index(got, "SOUR:FUNC CURR"), slices.Index(got, "SOUR:CURR 0.004")
	if fn < 0 || first < 0 || fn > first || !slices.Contains(got, "SOUR:VOLT:PROT 12") {
		t.Errorf("received %q: want SOUR:VOLT:PROT 12 and SOUR:FUNC CURR before SOUR:CURR 0.004", got)
	}
	if n := srv.Count("source", "SOUR:FUNC"); n != 1 {
		t.Errorf("current mode selected %d times, want once", n)
	}
	if err := cs.Reset(ctx); err != nil {
		t.Fatal(err)
	}
	if current, _, _ := sim.CurrentState(); current {
		t.Error("the bench source is still in current mode after *RST")
	}
	if err := cs.SetCurrent(ctx, 0); err != nil {
		t.Fatal(err)
	}
	if n := srv.Count("source", "SOUR:FUNC"); n != 2 {
		t.Errorf("current mode selected %d times after a reset, want twice", n)
	}
	if current, _, _ := sim.CurrentState(); !current {
		t.Error("SetCurrent after a reset left the bench source in voltage mode")
	}

	if _, ok := openKind(t, start(t, "tcp", serve.Options{}), "source", instruments.KindSource).(instruments.CurrentSource); ok {
		t.Error("a voltage_source is a CurrentSource: the engine could drive it in amperes")
	}
}
