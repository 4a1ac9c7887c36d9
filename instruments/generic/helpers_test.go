package generic_test

import (
	"context"
	"testing"
	"time"

	"trimline/instruments"
	"trimline/instruments/generic"
	"trimline/instruments/sim/serve"
	"trimline/instruments/sim/simtest"
)

// testTimeout is the exchange timeout of every instrument the tests open.
const testTimeout = 200 * time.Millisecond

// start serves the quiet bench over transport ("tcp" or "serial") with a unit loaded.
func start(t *testing.T, transport string, opt serve.Options) *serve.Server {
	t.Helper()
	opt.Transport = transport
	return simtest.Serve(t, opt)
}

// openKind opens role on srv as an instrument of kind, with no settings or
// templates of the test's own.
func openKind(t *testing.T, srv *serve.Server, role, kind string) instruments.Instrument {
	t.Helper()
	return openSpec(t, srv, role, kind, nil, nil)
}

// open opens role on srv with the generic driver: 200 ms timeout, one retry.
func open(t *testing.T, srv *serve.Server, role string, settings, templates map[string]string) instruments.Instrument {
	t.Helper()
	kind := ""
	if role == "mux" { // simtest.SwitchSpec's role
		kind = instruments.KindSwitch
	}
	return openSpec(t, srv, role, kind, settings, templates)
}

func openSpec(t *testing.T, srv *serve.Server, role, kind string, settings, templates map[string]string) instruments.Instrument {
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
	spec := instruments.Spec{Role: role, Kind: kind, Address: addr, Settings: s, Templates: templates, Timeout: testTimeout}
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
