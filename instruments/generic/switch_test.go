package generic_test

import (
	"math"
	"testing"
	"time"

	"trimline/instruments"
	"trimline/instruments/generic"
	"trimline/instruments/sim/serve"
	"trimline/instruments/sim/simtest"
)

// A two-channel current-output card behind the served multiplexer: the generic
// switch routes, the generic meter reads the loop current in FuncCurrent, and the
// source level shows only on the routed channel.
func TestSwitchAndCurrentOverTheWire(t *testing.T) {
	specs := simtest.QuietSpecs()
	specs[1].Settings = map[string]string{"noise": "0V", "gain_error": "0", "offset": "0V", "nplc": "0.01",
		"current_noise": "0A", "current_gain_error": "0", "current_offset": "0A"}
	specs[2].Settings = map[string]string{"output": "current", "channels": "2", "offset": "12uA", "gain_error": "-2500 ppm",
		"noise": "0A", "crossover_step": "0uV", "dnl": "0", "defect": "none"}
	srv := simtest.ServeSpecs(t, append(specs, simtest.SwitchSpec()), serve.Options{Transport: "tcp"})
	ctx := ctxT(t)
	m := open(t, srv, "meter", nil, nil).(*generic.Meter)
	sw := open(t, srv, "mux", nil, nil).(*generic.Switch)
	src := srv.Bench().Source()
	if err := src.SetLevel(ctx, 10e-3); err != nil {
		t.Fatal(err)
	}
	if err := src.SetOutput(ctx, true); err != nil {
		t.Fatal(err)
	}
	if err := m.SetFunction(ctx, instruments.FuncCurrent); err != nil {
		t.Fatal(err)
	}
	if err := m.Configure(ctx, 0.1, 0.01); err != nil {
		t.Fatal(err)
	}
	read := func() float64 {
		t.Helper()
		time.Sleep(20 * time.Millisecond) // the served bench runs on real time: τ = 1 ms
		rs, err := m.Read(ctx, 1)
		if err != nil {
			t.Fatal(err)
		}
		return rs[0].Value
	}
	if got := read(); got != 0 {
		t.Errorf("released: %g A, want 0", got)
	}
	// Routed: 4 mA + 12 µA + 10 mV · 0.8 A/V · (1 − 2500 ppm) = 11.992 mA (hand-worked).
	if err := sw.Route(ctx, "2"); err != nil {
		t.Fatal(err)
	}
	if got := read(); math.Abs(got-11.992e-3) > 20e-9 {
		t.Errorf("channel 2 routed: %g A, want 11.992 mA", got)
	}
	if got := srv.Bench().Switch().Routed(); got != "2" {
		t.Errorf("the bench routes %q, want 2", got)
	}
	if err := sw.Route(ctx, "3"); err == nil {
		t.Error("channel 3 of a two-channel card routed")
	}
	if err := sw.Release(ctx); err != nil {
		t.Fatal(err)
	}
	if got := read(); got != 0 {
		t.Errorf("released again: %g A, want 0", got)
	}
	// Back to voltage: a current card shows no voltage.
	if err := m.SetFunction(ctx, instruments.FuncVoltage); err != nil {
		t.Fatal(err)
	}
	if err := sw.Route(ctx, "1"); err != nil {
		t.Fatal(err)
	}
	if got := read(); got != 0 {
		t.Errorf("current card in FuncVoltage: %g V, want 0", got)
	}
	if f := srv.Bench().Meter().Function(); f != instruments.FuncVoltage {
		t.Errorf("served meter measures %s", f)
	}
}

func TestMeterWithoutCurrentFunction(t *testing.T) {
	srv := start(t, "tcp", serve.Options{})
	m := open(t, srv, "meter", nil, map[string]string{"function_current": ""}).(*generic.Meter)
	if err := m.SetFunction(ctxT(t), instruments.FuncCurrent); err == nil {
		t.Error("a meter without function_current selected current")
	}
	if n := srv.Count("meter", "CONF:CURR"); n != 0 {
		t.Errorf("%d CONF:CURR lines sent", n)
	}
}
