package generic_test

import (
	"context"
	"errors"
	"testing"
	"time"

	"trimline/instruments"
	"trimline/instruments/generic"
	"trimline/instruments/scpi"
	"trimline/instruments/sim/serve"
)

// watchdogTemplates arm and disarm the served source's output watchdog.
var watchdogTemplates = map[string]string{"arm_watchdog": "OUTP:WATC {seconds}", "disarm_watchdog": "OUTP:WATC OFF"}

// A source opened with the arm_watchdog template and the watchdog setting keeps its
// output on while armed again in time; when the station stops talking with the
// output on (its link closed without a switch-off, as a kill -9 leaves it), the
// served source switches the output off and programs 0 V once the time has run out.
func TestWatchdogSwitchesOffWhenTheStationStopsTalking(t *testing.T) {
	srv := start(t, "tcp", serve.Options{})
	ctx := ctxT(t)
	in := open(t, srv, "source", map[string]string{"watchdog": "1 s"}, watchdogTemplates)
	w, ok := in.(*generic.WatchdogSource)
	if !ok {
		t.Fatalf("opened %T, want *generic.WatchdogSource", in)
	}
	var _ instruments.OutputWatchdog = w
	if err := w.SetLevel(ctx, 5e-3); err != nil {
		t.Fatal(err)
	}
	if err := w.ArmWatchdog(ctx); err != nil {
		t.Fatal(err)
	}
	if err := w.SetOutput(ctx, true); err != nil {
		t.Fatal(err)
	}
	// The watchdog's time is long beside the re-arm period, so that a loaded
	// machine's late re-arm does not trip it.
	for range 4 { // 4 × 250 ms, re-armed each time: the watchdog's time
		time.Sleep(250 * time.Millisecond)
		if err := w.ArmWatchdog(ctx); err != nil {
			t.Fatal(err)
		}
	}
	if on, lvl := srv.Bench().Source().State(); !on || lvl != 5e-3 {
		t.Fatalf("kept alive, the source is on=%v at %g V, want on at 5 mV", on, lvl)
	}
	if n := srv.Count("source", "OUTP:WATC 1"); n != 5 {
		t.Errorf("sent the arm command %d times, want 5", n)
	}

	// The station dies: its link closes without a switch-off.
	w.Session().Close()
	if on, _ := srv.Bench().Source().State(); !on {
		t.Fatal("the output went off before the watchdog's time")
	}
	// Off once the second has run out: polled, with room for a loaded machine.
	deadline := time.Now().Add(10 * time.Second)
	for {
		on, lvl := srv.Bench().Source().State()
		if !on && lvl == 0 {
			break
		}
		if time.Now().After(deadline) {
			t.Fatalf("10 s after the station stopped talking: on=%v level=%g, want off at 0 V", on, lvl)
		}
		time.Sleep(50 * time.Millisecond)
	}
}

// A watchdog that runs out while the station still talks queues an entry, so the
// engine's next read of the error queue finds it; a disarmed one does nothing.
func TestWatchdogTripIsQueuedAndDisarmHolds(t *testing.T) {
	srv := start(t, "tcp", serve.Options{})
	ctx := ctxT(t)
	w := open(t, srv, "source", map[string]string{"watchdog": "200 ms"}, watchdogTemplates).(*generic.WatchdogSource)
	w.SetLevel(ctx, 5e-3)
	if err := w.ArmWatchdog(ctx); err != nil {
		t.Fatal(err)
	}
	w.SetOutput(ctx, true)
	time.Sleep(300 * time.Millisecond)
	var ie *scpi.InstrumentError
	if err := w.CheckErrors(ctx); !errors.As(err, &ie) || ie.Code != 301 {
		t.Fatalf("error queue after the watchdog ran out: %v, want entry 301", err)
	}

	if err := w.SetLevel(ctx, 5e-3); err != nil {
		t.Fatal(err)
	}
	w.ArmWatchdog(ctx)
	w.SetOutput(ctx, true)
	if err := w.DisarmWatchdog(ctx); err != nil {
		t.Fatal(err)
	}
	time.Sleep(300 * time.Millisecond)
	if on, _ := srv.Bench().Source().State(); !on {
		t.Fatal("a disarmed watchdog switched the output off")
	}
	if err := w.CheckErrors(ctx); err != nil {
		t.Fatal(err)
	}
	if err := w.SetOutput(context.Background(), false); err != nil {
		t.Fatal(err)
	}
}
