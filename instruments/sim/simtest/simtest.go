// Package simtest serves a quiet simulated bench for tests of the drivers and the
// engine over a real wire: no instrument errors or noise, a short meter aperture
// (0.01 PLC = 0.2 ms) and a DUT that settles in 1 ms.
package simtest

import (
	"context"
	"runtime"
	"testing"

	"trimline/instruments"
	"trimline/instruments/sim/serve"
)

// QuietSpecs are the source, meter and DUT of the quiet bench, at sim:// addresses.
func QuietSpecs() []instruments.Spec {
	return []instruments.Spec{
		{Role: "source", Address: "sim://source", Settings: map[string]string{"noise": "0V", "gain_error": "0", "offset": "0V", "thermal_emf": "0V"}},
		{Role: "meter", Address: "sim://meter", Settings: map[string]string{"noise": "0V", "gain_error": "0", "offset": "0V", "nplc": "0.01"}},
		{Role: "dut", Address: "sim://dut", Settings: map[string]string{"offset": "3.1mV", "gain_error": "-2500 ppm", "noise": "0V",
			"crossover_step": "0uV", "dnl": "0", "defect": "none"}},
	}
}

// Serve serves the quiet bench over opt.Transport ("tcp" or "serial") with unit
// BRX-000001 loaded, and closes it when the test ends. It skips the test for
// "serial" where there are no pseudo-terminals.
func Serve(t testing.TB, opt serve.Options) *serve.Server {
	t.Helper()
	return ServeSpecs(t, QuietSpecs(), opt)
}

// SwitchSpec is a relay multiplexer (sim://switch) to add to QuietSpecs; with it the
// bench starts with every path open, so the meter reads ≈ 0 until a channel is
// routed.
func SwitchSpec() instruments.Spec {
	return instruments.Spec{Role: "mux", Kind: instruments.KindSwitch, Address: "sim://switch"}
}

// ChamberSpec is a sim://chamber spec with role "chamber" and kind thermal.
func ChamberSpec() instruments.Spec {
	return instruments.Spec{Role: "chamber", Kind: instruments.KindThermal, Address: "sim://chamber"}
}

// ServeSpecs is Serve with specs of the caller's (e.g. QuietSpecs plus SwitchSpec).
func ServeSpecs(t testing.TB, specs []instruments.Spec, opt serve.Options) *serve.Server {
	t.Helper()
	if opt.Transport == "serial" && runtime.GOOS != "linux" && runtime.GOOS != "darwin" {
		t.Skip("no pseudo-terminals here")
	}
	srv, err := serve.Start(context.Background(), specs, opt)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { srv.Close() })
	if err := srv.LoadUnit(context.Background(), "BRX-000001"); err != nil {
		t.Fatal(err)
	}
	return srv
}
