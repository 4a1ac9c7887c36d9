package generic_test

import (
	"context"
	"runtime"
	"testing"
	"time"

	"trimline/instruments"
	"trimline/instruments/generic"
	"trimline/instruments/sim/serve"
)

// testTimeout is the exchange timeout of every instrument the tests open.
const testTimeout = 200 * time.Millisecond

// benchSpecs is a quiet served bench: no instrument errors or noise, a short meter
// aperture (0.01 PLC = 0.2 ms) and a DUT that settles in 1 ms.
func benchSpecs() []instruments.Spec {
	return []instruments.Spec{
		{Role: "source", Address: "sim://source", Settings: map[string]string{"noise": "0V", "gain_error": "0", "offset": "0V"}},
		{Role: "meter", Address: "sim://meter", Settings: map[string]string{"noise": "0V", "gain_error": "0", "offset": "0V", "nplc": "0.01"}},
		{Role: "dut", Address: "sim://dut", Settings: map[string]string{"offset": "3.1mV", "gain_error": "-2500 ppm", "noise": "0V",
			"crossover_step": "0uV", "dnl": "0", "defect": "none"}},
	}
}

// start serves a quiet bench over transport ("tcp" or "serial") with a unit loaded.
func start(t *testing.T, transport string, opt serve.Options) *serve.Server {
	t.Helper()
	if transport == "serial" && runtime.GOOS != "linux" && runtime.GOOS != "darwin" {
		t.Skip("no pseudo-terminals here")
	}
	opt.Transport = transport
	srv, err := serve.Start(context.Background(), benchSpecs(), opt)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { srv.Close() })
	if err := srv.LoadUnit(context.Background(), "BRX-000001"); err != nil {
		t.Fatal(err)
	}
	return srv
}

// open opens role on srv with the generic driver: 200 ms timeout, one retry.
func open(t *testing.T, srv *serve.Server, role string, settings, templates map[string]string) instruments.Instrument {
	t.Helper()
	addr := srv.Addresses()[role]
	drv, u, err := instruments.Lookup(addr)
	if err != nil {
		t.Fatal(err)
	}
	if _, ok := drv.(generic.Driver); !ok {
		t.Fatalf("%s is served by %T, want generic.Driver", addr, drv)
	}
	s := map[string]string{"retries": "1"}
	for k, v := range settings {
		s[k] = v
	}
	spec := instruments.Spec{Role: role, Address: addr, Settings: s, Templates: templates, Timeout: testTimeout}
	if err := drv.(instruments.SettingsChecker).CheckSettings(spec); err != nil {
		t.Fatal(err)
	}
	in, err := drv.Open(context.Background(), u, spec)
	if err != nil {
		t.Fatalf("open %s at %s: %v", role, addr, err)
	}
	t.Cleanup(func() { in.Close() })
	return in
}

func ctxT(t *testing.T) context.Context {
	ctx, cancel := context.WithTimeout(context.Background(), 20*time.Second)
	t.Cleanup(cancel)
	return ctx
}
