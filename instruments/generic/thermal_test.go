package generic_test

import (
	"context"
	"testing"

	"trimline/instruments"
	"trimline/instruments/generic"
	"trimline/instruments/sim/serve"
	"trimline/instruments/sim/simtest"
)

// TestThermal drives a served sim chamber through the templates: the set point
// reaches the chamber as sent (TEMP:SETP 85), the read is the chamber's
// temperature (25 °C at power-on, noise 0), Stable answers the chamber's flag (at
// rest: stable; just after a 60 °C step: not), and without the stable template
// the driver is a plain *Thermal.
func TestThermal(t *testing.T) {
	ctx := context.Background()
	spec := simtest.ChamberSpec()
	spec.Settings = map[string]string{"noise": "0 °C"}
	srv := simtest.ServeSpecs(t, append(simtest.QuietSpecs(), spec), serve.Options{})
	th := openSpec(t, srv, "chamber", instruments.KindThermal, nil, map[string]string{"stable": "TEMP:STAB?"})
	st, ok := th.(*generic.StableThermal)
	if !ok {
		t.Fatalf("%T, want *generic.StableThermal", th)
	}
	if v, err := st.Temperature(ctx); err != nil || v != 25 {
		t.Fatalf("Temperature = %v, %v; want 25", v, err)
	}
	if ok, err := st.Stable(ctx); err != nil || !ok {
		t.Fatalf("at rest: Stable = %v, %v; want true", ok, err)
	}
	if err := st.SetTemperature(ctx, 85); err != nil {
		t.Fatal(err)
	}
	if sp := srv.Bench().Chamber().SetPoint(); sp != 85 {
		t.Fatalf("chamber set point %g, want 85", sp)
	}
	if ok, err := st.Stable(ctx); err != nil || ok {
		t.Fatalf("just after a step: Stable = %v, %v; want false", ok, err)
	}
	if n := srv.Count("chamber", "TEMP:SETP 85"); n != 1 {
		t.Fatalf("TEMP:SETP 85 sent %d times, want once", n)
	}
	plain := openSpec(t, srv, "chamber", instruments.KindThermal, nil, nil)
	if _, ok := plain.(instruments.StableReporter); ok {
		t.Fatalf("%T without the stable template reports stability", plain)
	}
}
