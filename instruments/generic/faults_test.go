package generic_test

import (
	"context"
	"errors"
	"strings"
	"testing"
	"time"

	"trimline/instruments"
	"trimline/instruments/generic"
	"trimline/instruments/scpi"
	"trimline/instruments/sim/serve"
	"trimline/instruments/transport"
)

// Each test opens the instrument healthy, then arms one fault with SetFault, so the
// counts start after the opening exchanges.

func TestFaultDelayBeyondTimeout(t *testing.T) {
	srv := start(t, "tcp", serve.Options{})
	m := open(t, srv, "meter", nil, nil).(*generic.Meter)
	srv.SetFault("meter", serve.Fault{Delay: 2 * testTimeout})
	start := time.Now()
	_, err := m.Identify(ctxT(t))
	if !errors.Is(err, transport.ErrTimeout) {
		t.Fatalf("Identify with replies %v late: err = %v, want ErrTimeout", 2*testTimeout, err)
	}
	// *IDN? is idempotent: one retry, each try bounded by the timeout.
	if el := time.Since(start); el < 2*testTimeout || el > 2*testTimeout+time.Second {
		t.Fatalf("failed after %v, want about 2 × %v", el, testTimeout)
	}
	if n := srv.Count("meter", "*IDN?"); n != 2 {
		t.Fatalf("*IDN? sent %d times, want 2 (one try and one retry)", n)
	}
	// A delay inside the timeout is only slow.
	srv.SetFault("meter", serve.Fault{Delay: testTimeout / 4})
	if _, err := m.Identify(ctxT(t)); err != nil {
		t.Fatalf("Identify with replies %v late: %v", testTimeout/4, err)
	}
}

func TestFaultNoReply(t *testing.T) {
	srv := start(t, "tcp", serve.Options{})
	s := open(t, srv, "source", nil, nil).(*generic.Source)
	srv.SetFault("source", serve.Fault{NoReply: true, NoReplyAfter: 2})
	err := s.SetLevel(ctxT(t), 5e-3) // SOUR:VOLT, SYST:ERR? answered; SOUR:VOLT? not
	if !errors.Is(err, transport.ErrTimeout) {
		t.Fatalf("SetLevel with the read-back unanswered: err = %v, want ErrTimeout", err)
	}
	if n := srv.Count("source", "SOUR:VOLT 0.005"); n != 1 {
		t.Fatalf("SOUR:VOLT sent %d times, want 1", n)
	}
}

func TestFaultDroppedLink(t *testing.T) {
	srv := start(t, "tcp", serve.Options{})
	s := open(t, srv, "source", nil, nil).(*generic.Source)
	ctx := ctxT(t)

	// A query: the link drops when it arrives; the session reconnects and asks again.
	srv.SetFault("source", serve.Fault{DropAfter: 1})
	id, err := s.Identify(ctx)
	if err != nil {
		t.Fatalf("Identify across a dropped link: %v", err)
	}
	if id.Maker != "Trimline Sim" {
		t.Fatalf("identity %+v", id)
	}
	if n, r := srv.Count("source", "*IDN?"), s.Session().Reconnects(); n != 2 || r != 1 {
		t.Fatalf("*IDN? sent %d times over %d reconnects, want 2 and 1", n, r)
	}

	// A command: the new link carried *IDN?; it drops when the level arrives. The
	// command is lost, must not be sent again, and the caller hears of it.
	err = s.SetLevel(ctx, 7e-3)
	var lost *scpi.LostError
	if !errors.Is(err, transport.ErrLinkDown) || !errors.As(err, &lost) || lost.Command != "SOUR:VOLT 0.007" {
		t.Fatalf("SetLevel across a dropped link: err = %v, want a *scpi.LostError for SOUR:VOLT 0.007 wrapping ErrLinkDown", err)
	}
	if n := srv.Count("source", "SOUR:VOLT 0.007"); n != 1 {
		t.Fatalf("SOUR:VOLT 0.007 sent %d times, want exactly 1 (never repeated)", n)
	}
	if _, level := srv.Bench().Source().State(); level != 0 {
		t.Fatalf("the lost command was carried out: level %g", level)
	}

	// Switching off still works: it reconnects (the drop fault is per link).
	srv.SetFault("source", serve.Fault{})
	if err := s.SetOutput(context.Background(), false); err != nil {
		t.Fatalf("SetOutput(off) after the dropped link: %v", err)
	}
}

func TestFaultDroppedLinkSerial(t *testing.T) {
	// A pseudo-terminal that hangs up is gone for good, like an unplugged adapter.
	srv := start(t, "serial", serve.Options{})
	m := open(t, srv, "meter", nil, nil).(*generic.Meter)
	srv.SetFault("meter", serve.Fault{DropAfter: 1})
	_, err := m.Identify(ctxT(t))
	if err == nil {
		t.Fatal("Identify on a hung-up serial port succeeded")
	}
	if !errors.Is(err, transport.ErrLinkDown) && !strings.Contains(err.Error(), "reconnect") {
		t.Fatalf("err = %v, want ErrLinkDown or a failed reconnect", err)
	}
}

func TestFaultGarbled(t *testing.T) {
	srv := start(t, "tcp", serve.Options{})
	m := open(t, srv, "meter", nil, nil).(*generic.Meter)
	ctx := ctxT(t)
	if _, err := m.Read(ctx, 3); err != nil { // program the count before arming
		t.Fatal(err)
	}
	srv.SetFault("meter", serve.Fault{Garble: true})
	if _, err := m.Read(ctx, 3); !errors.Is(err, scpi.ErrMalformed) {
		t.Fatalf("Read with a garbled reply: err = %v, want ErrMalformed", err)
	}
	srv.SetFault("meter", serve.Fault{Garble: true})
	if _, err := m.Identify(ctx); !errors.Is(err, scpi.ErrMalformed) {
		t.Fatalf("Identify with a garbled reply: err = %v, want ErrMalformed", err)
	}
	if _, err := m.Read(ctx, 3); err != nil {
		t.Fatalf("Read after the garbled reply: %v", err)
	}
}

func TestFaultTruncated(t *testing.T) {
	srv := start(t, "tcp", serve.Options{})
	m := open(t, srv, "meter", nil, nil).(*generic.Meter)
	ctx := ctxT(t)
	if _, err := m.Read(ctx, 5); err != nil {
		t.Fatal(err)
	}
	srv.SetFault("meter", serve.Fault{Truncate: true})
	if _, err := m.Read(ctx, 5); !errors.Is(err, scpi.ErrMalformed) {
		t.Fatalf("Read with a truncated reply: err = %v, want ErrMalformed", err)
	}
	s := open(t, srv, "source", nil, nil).(*generic.Source)
	srv.SetFault("source", serve.Fault{Truncate: true})
	if _, err := s.Identify(ctx); !errors.Is(err, scpi.ErrMalformed) {
		t.Fatalf("Identify with a truncated reply: err = %v, want ErrMalformed", err)
	}
}

func TestFaultErrorQueue(t *testing.T) {
	srv := start(t, "tcp", serve.Options{})
	s := open(t, srv, "source", nil, nil).(*generic.Source)
	ctx := ctxT(t)
	srv.SetFault("source", serve.Fault{ErrorAfter: "SOUR:CURR:PROT"})
	err := s.SetCompliance(ctx, 5e-3)
	var ie *scpi.InstrumentError
	if !errors.As(err, &ie) || ie.Code != -300 || ie.Text != "Device-specific error" || ie.Command != "SOUR:CURR:PROT 0.005" {
		t.Fatalf("SetCompliance with an error queued: err = %v, want *InstrumentError -300 after SOUR:CURR:PROT 0.005", err)
	}
	if err := s.SetCompliance(ctx, 5e-3); err != nil {
		t.Fatalf("the queue was not drained: %v", err)
	}

	// The instrument's own errors: a level outside the range, an unknown header.
	if err := s.SetLevel(ctx, 1); !errors.As(err, &ie) || ie.Code != -222 || ie.Text != "Data out of range" {
		t.Fatalf("SetLevel(1 V) on the 100 mV source: err = %v, want -222", err)
	}
	bad := open(t, srv, "source", nil, map[string]string{"set_compliance": "SOUR:CURR:LIMX {amps}"}).(*generic.Source)
	if err := bad.SetCompliance(ctx, 5e-3); !errors.As(err, &ie) || ie.Code != -113 || ie.Command != "SOUR:CURR:LIMX 0.005" {
		t.Fatalf("unknown header: err = %v, want -113 naming the command", err)
	}
}

func TestFaultOverload(t *testing.T) {
	srv := start(t, "tcp", serve.Options{})
	m := open(t, srv, "meter", nil, nil).(*generic.Meter)
	srv.SetFault("meter", serve.Fault{Overload: true})
	rs, err := m.Read(ctxT(t), 4)
	if err != nil {
		t.Fatal(err)
	}
	for i, r := range rs {
		if r.Flag != instruments.FlagOverload || r.Valid() {
			t.Fatalf("reading %d = %+v, want a flagged overload, never a number", i, r)
		}
	}
}

func TestFaultDUTReadbackMismatch(t *testing.T) {
	srv := start(t, "tcp", serve.Options{})
	p := open(t, srv, "dut", nil, nil).(*generic.Port)
	ctx := ctxT(t)
	srv.SetFault("dut", serve.Fault{ReadbackMismatch: true})
	if err := p.Command(ctx, "TRIM OFS 2100"); err != nil {
		t.Fatal(err)
	}
	got, err := p.Query(ctx, "TRIM OFS?")
	if err != nil || got == "2100" || got != "2101" {
		t.Fatalf("TRIM OFS? = %q, %v; want a different code (2101)", got, err)
	}
}

func TestFaultDUTErrorAndLid(t *testing.T) {
	srv := start(t, "tcp", serve.Options{LidOpenAfter: 3})
	// The driver sends nothing at open, so the DUT's count starts here.
	p := open(t, srv, "dut", nil, nil).(*generic.Port)
	ctx := ctxT(t)
	srv.SetFault("dut", serve.Fault{ErrorAfter: "TRIM GAIN"})
	var re *generic.ReplyError
	if err := p.Command(ctx, "TRIM GAIN 2000"); !errors.As(err, &re) || re.Reply != "ERR injected fault" {
		t.Fatalf("Command with an injected error: err = %v, want a *ReplyError", err)
	}
	if got, _ := p.Query(ctx, "TRIM GAIN?"); got != "2048" {
		t.Fatalf("the refused command was carried out: TRIM GAIN? = %q", got)
	}
	// Two DUT commands so far: the third still sees the lid closed, then it opens.
	for _, want := range []string{"CLOSED", "OPEN", "OPEN"} {
		if got, err := p.Query(ctx, "LID?"); err != nil || got != want {
			t.Fatalf("LID? = %q, %v; want %q", got, err, want)
		}
	}
}

func TestLidClosedByDefault(t *testing.T) {
	srv := start(t, "tcp", serve.Options{})
	p := open(t, srv, "dut", nil, nil).(*generic.Port)
	for range 3 {
		if got, err := p.Query(ctxT(t), "LID?"); err != nil || got != "CLOSED" {
			t.Fatalf("LID? = %q, %v; want CLOSED", got, err)
		}
	}
}
