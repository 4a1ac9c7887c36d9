// Package conformance is a test suite every trimline driver must pass. Source,
// CurrentSource, Meter, TrimPort, Switch and Thermal run subtests against instruments a test opens with its own open
// function (called once per subtest; register cleanup with t.Cleanup there):
// identification (if the instrument is an Identifier), set and read, rejected
// requests and the error queue, timeouts and cancellation while blocked (when Hooks
// can silence the peer), cancellation without a peer to silence, and Close twice.
//
// The suite uses only the instruments contract, plus the sentinels of packages
// transport and scpi for the kinds of error it expects.
package conformance

import (
	"context"
	"errors"
	"math"
	"strings"
	"testing"
	"time"

	"trimline/instruments"
	"trimline/instruments/scpi"
	"trimline/instruments/transport"
)

// Hooks tell the suite what an instrument can be made to do. The zero value runs
// every subtest that needs no help.
type Hooks struct {
	// Silence makes the peer of the instrument opened last stop answering for the
	// rest of t (it registers its own cleanup if it needs one). nil skips the timeout
	// subtest; the cancellation subtest then cancels a long call instead.
	Silence func(t *testing.T)
	// Timeout is the instrument's exchange timeout; 0 means 2 s. A call to a silent
	// peer must fail with transport.ErrTimeout after at least Timeout/2 and within
	// (Retries+1)·Timeout + 1 s.
	Timeout time.Duration
	// Retries is how often the instrument repeats an idempotent query.
	Retries int
	// ErrorQueue means requests the instrument rejects fail with its own
	// *scpi.InstrumentError.
	ErrorQueue bool
	// Level is a safe source level in volts; 0 means 10 mV.
	Level float64
	// OutOfRange is a source level the source must refuse; 0 skips that check.
	OutOfRange float64
	// BadRange is a meter range the meter must refuse; 0 skips that check.
	BadRange float64
	// Probe is a trim-port query that must answer (default "SN?"), Command a command
	// that must succeed (default "TRIM OFS 2048") and Bad a line the port must refuse
	// (default "NO SUCH COMMAND").
	Probe, Command, Bad string
	// LongRead is how many readings the cancellation subtest asks for without a
	// Silence hook; 0 means 200.
	LongRead int
	// Channel is a channel a switch must route (default "1"); BadChannel one it must
	// refuse (default "99").
	Channel, BadChannel string
	// SetPoint is a set point in °C a thermal must take (0 means 30 °C);
	// BadSetPoint one it must refuse (0 skips that check).
	SetPoint, BadSetPoint float64
}

func hooksOf(h []Hooks) Hooks {
	var o Hooks
	if len(h) > 0 {
		o = h[0]
	}
	if o.Timeout <= 0 {
		o.Timeout = 2 * time.Second
	}
	if o.Level == 0 {
		o.Level = 10e-3
	}
	if o.Probe == "" {
		o.Probe = "SN?"
	}
	if o.Command == "" {
		o.Command = "TRIM OFS 2048"
	}
	if o.Bad == "" {
		o.Bad = "NO SUCH COMMAND"
	}
	if o.LongRead <= 0 {
		o.LongRead = 200
	}
	return o
}

// bgCtx returns a context bounded well beyond any exchange of the suite.
func bgCtx(t *testing.T) context.Context {
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	t.Cleanup(cancel)
	return ctx
}

func identify(t *testing.T, in instruments.Instrument) {
	id, ok := in.(instruments.Identifier)
	if !ok {
		t.Skip("not an Identifier")
	}
	got, err := id.Identify(bgCtx(t))
	if err != nil {
		t.Fatalf("Identify: %v", err)
	}
	for _, f := range []string{got.Maker, got.Model, got.Serial, got.Firmware} {
		if f == "" || strings.ContainsAny(f, ",\r\n") {
			t.Fatalf("Identify = %+v: every field must be non-empty and free of commas and line breaks", got)
		}
	}
}

func reset(t *testing.T, in instruments.Instrument) {
	r, ok := in.(instruments.Resetter)
	if !ok {
		t.Skip("not a Resetter")
	}
	if err := r.Reset(bgCtx(t)); err != nil {
		t.Fatalf("Reset: %v", err)
	}
}

func closeTwice(t *testing.T, in instruments.Instrument) {
	in.Close()
	if err := in.Close(); err != nil {
		t.Fatalf("second Close = %v, want nil", err)
	}
}

// timed runs f and checks it fails with a timeout in the allowed window.
func timed(t *testing.T, h Hooks, what string, f func(ctx context.Context) error) {
	start := time.Now()
	err := f(bgCtx(t))
	el := time.Since(start)
	if !errors.Is(err, transport.ErrTimeout) {
		t.Fatalf("%s to a silent peer: err = %v, want one wrapping transport.ErrTimeout", what, err)
	}
	if lo, hi := h.Timeout/2, time.Duration(h.Retries+1)*h.Timeout+time.Second; el < lo || el > hi {
		t.Fatalf("%s to a silent peer failed after %v, want between %v and %v", what, el, lo, hi)
	}
}

// cancelled runs f with a context cancelled after 50 ms and checks it returns within
// 1 s of the cancel with the context's error (or, when mayFinish, without error).
func cancelled(t *testing.T, what string, mayFinish bool, f func(ctx context.Context) error) {
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	done := make(chan error, 1)
	go func() { done <- f(ctx) }()
	time.Sleep(50 * time.Millisecond)
	cancel()
	at := time.Now()
	select {
	case err := <-done:
		if err == nil && mayFinish {
			return
		}
		if !errors.Is(err, context.Canceled) {
			t.Fatalf("%s cancelled: err = %v, want one wrapping context.Canceled", what, err)
		}
		if el := time.Since(at); el > time.Second {
			t.Fatalf("%s returned %v after the cancel, want < 1 s", what, el)
		}
	case <-time.After(2 * time.Second):
		t.Fatalf("%s did not return within 2 s of the cancel", what)
	}
}

func preCancelled(t *testing.T, what string, f func(ctx context.Context) error) {
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	start := time.Now()
	err := f(ctx)
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("%s with a cancelled context: err = %v, want one wrapping context.Canceled", what, err)
	}
	if el := time.Since(start); el > time.Second {
		t.Fatalf("%s with a cancelled context took %v", what, el)
	}
}

func wantInstrumentError(t *testing.T, h Hooks, what string, err error) {
	if err == nil {
		t.Fatalf("%s: accepted, want an error", what)
	}
	if h.ErrorQueue {
		var ie *scpi.InstrumentError
		if !errors.As(err, &ie) || ie.Code == 0 || ie.Text == "" {
			t.Fatalf("%s: err = %v, want a *scpi.InstrumentError with the instrument's code and text", what, err)
		}
	}
}

// call is one request of a sequence that must succeed: what names it in the
// failure.
type call struct {
	what string
	f    func() error
}

// inOrder makes the calls in order and stops the test at the first that fails.
func inOrder(t *testing.T, calls []call) {
	t.Helper()
	for _, c := range calls {
		if err := c.f(); err != nil {
			t.Fatalf("%s: %v", c.what, err)
		}
	}
}

// offWhenDone checks that s still switches its output off with a done context.
func offWhenDone(t *testing.T, s instruments.Source) {
	t.Helper()
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if err := s.SetOutput(ctx, false); err != nil {
		t.Fatalf("SetOutput(off) with a done context: %v, want nil (it must still switch off)", err)
	}
}

// closeTwiceOff closes s twice, then checks that switching its output off
// still succeeds.
func closeTwiceOff(t *testing.T, s instruments.Source) {
	t.Helper()
	closeTwice(t, s)
	if err := s.SetOutput(context.Background(), false); err != nil {
		t.Fatalf("SetOutput(off) after Close: %v, want nil", err)
	}
}

// Source runs the suite on a voltage source.
func Source(t *testing.T, open func(t *testing.T) instruments.Source, hooks ...Hooks) {
	h := hooksOf(hooks)
	t.Run("identify", func(t *testing.T) { identify(t, open(t)) })
	t.Run("reset", func(t *testing.T) { reset(t, open(t)) })
	t.Run("set level and output", func(t *testing.T) {
		s, ctx := open(t), bgCtx(t)
		inOrder(t, []call{
			{"SetLevel(+level)", func() error { return s.SetLevel(ctx, h.Level) }},
			{"SetOutput(on)", func() error { return s.SetOutput(ctx, true) }},
			{"SetLevel(-level)", func() error { return s.SetLevel(ctx, -h.Level) }},
			{"SetOutput(off)", func() error { return s.SetOutput(ctx, false) }},
			{"SetLevel(0)", func() error { return s.SetLevel(ctx, 0) }},
			{"SetOutput(off) again", func() error { return s.SetOutput(ctx, false) }},
		})
	})
	t.Run("rejects", func(t *testing.T) {
		s, ctx := open(t), bgCtx(t)
		if err := s.SetLevel(ctx, math.NaN()); err == nil {
			t.Fatal("SetLevel(NaN) accepted")
		}
		if h.OutOfRange != 0 {
			wantInstrumentError(t, h, "SetLevel(out of range)", s.SetLevel(ctx, h.OutOfRange))
		}
		if err := s.SetOutput(ctx, false); err != nil {
			t.Fatalf("SetOutput(off) after a refused request: %v", err)
		}
		if err := s.SetLevel(ctx, h.Level); err != nil {
			t.Fatalf("SetLevel after a refused request: %v", err)
		}
	})
	t.Run("compliance", func(t *testing.T) {
		s, ctx := open(t), bgCtx(t)
		if err := s.SetCompliance(ctx, 10e-3); err != nil {
			t.Fatalf("SetCompliance(10 mA): %v", err)
		}
		if err := s.SetCompliance(ctx, -1); err == nil {
			t.Fatal("SetCompliance(-1 A) accepted")
		}
		if err := s.SetCompliance(ctx, 5e-3); err != nil {
			t.Fatalf("SetCompliance(5 mA) after a refused request: %v", err)
		}
	})
	t.Run("off after cancel", func(t *testing.T) {
		s := open(t)
		if err := s.SetOutput(bgCtx(t), true); err != nil {
			t.Fatalf("SetOutput(on): %v", err)
		}
		offWhenDone(t, s)
	})
	t.Run("cancel", func(t *testing.T) {
		s := open(t)
		preCancelled(t, "SetLevel", func(ctx context.Context) error { return s.SetLevel(ctx, h.Level) })
		if h.Silence != nil {
			h.Silence(t)
			cancelled(t, "SetLevel to a silent peer", false, func(ctx context.Context) error { return s.SetLevel(ctx, h.Level) })
		}
	})
	t.Run("timeout", func(t *testing.T) {
		if h.Silence == nil {
			t.Skip("no Silence hook")
		}
		s := open(t)
		h.Silence(t)
		timed(t, h, "SetLevel", func(ctx context.Context) error { return s.SetLevel(ctx, h.Level) })
	})
	t.Run("close twice", func(t *testing.T) {
		s := open(t)
		closeTwiceOff(t, s)
	})
}

// CurrentSource runs the suite on a source opened to drive a current: it must
// be an instruments.CurrentSource; the compliance voltage and currents are set
// and refused as a voltage source's level is, the output switches off at any
// time (also after a refused request and with a done context) and Close works
// twice. Level (volts) is read as milliamperes here: 10 mV means 10 mA.
func CurrentSource(t *testing.T, open func(t *testing.T) instruments.Source, hooks ...Hooks) {
	h := hooksOf(hooks)
	amps := h.Level // volts read as mA: 10 mV is 10 mA
	cur := func(t *testing.T) (instruments.Source, instruments.CurrentSource) {
		s := open(t)
		cs, ok := s.(instruments.CurrentSource)
		if !ok {
			t.Fatalf("%T is not an instruments.CurrentSource", s)
		}
		return s, cs
	}
	t.Run("reset", func(t *testing.T) { s, _ := cur(t); reset(t, s) })
	t.Run("set current and output", func(t *testing.T) {
		s, cs := cur(t)
		ctx := bgCtx(t)
		inOrder(t, []call{
			{"SetVoltageLimit(5 V)", func() error { return cs.SetVoltageLimit(ctx, 5) }},
			{"SetCurrent(+level)", func() error { return cs.SetCurrent(ctx, amps) }},
			{"SetOutput(on)", func() error { return s.SetOutput(ctx, true) }},
			{"SetCurrent(-level)", func() error { return cs.SetCurrent(ctx, -amps) }},
			{"SetOutput(off)", func() error { return s.SetOutput(ctx, false) }},
			{"SetCurrent(0)", func() error { return cs.SetCurrent(ctx, 0) }},
			{"SetOutput(off) again", func() error { return s.SetOutput(ctx, false) }},
		})
	})
	t.Run("rejects", func(t *testing.T) {
		s, cs := cur(t)
		ctx := bgCtx(t)
		if err := cs.SetCurrent(ctx, math.NaN()); err == nil {
			t.Fatal("SetCurrent(NaN) accepted")
		}
		if err := cs.SetVoltageLimit(ctx, -1); err == nil {
			t.Fatal("SetVoltageLimit(-1 V) accepted")
		}
		if err := cs.SetVoltageLimit(ctx, math.Inf(1)); err == nil {
			t.Fatal("SetVoltageLimit(+Inf) accepted")
		}
		if err := s.SetOutput(ctx, false); err != nil {
			t.Fatalf("SetOutput(off) after a refused request: %v", err)
		}
		if err := cs.SetCurrent(ctx, amps); err != nil {
			t.Fatalf("SetCurrent after a refused request: %v", err)
		}
	})
	t.Run("off after cancel", func(t *testing.T) {
		s, cs := cur(t)
		if err := cs.SetCurrent(bgCtx(t), amps); err != nil {
			t.Fatalf("SetCurrent: %v", err)
		}
		if err := s.SetOutput(bgCtx(t), true); err != nil {
			t.Fatalf("SetOutput(on): %v", err)
		}
		offWhenDone(t, s)
	})
	t.Run("close twice", func(t *testing.T) {
		s, _ := cur(t)
		closeTwiceOff(t, s)
	})
}

// Meter runs the suite on a voltmeter.
func Meter(t *testing.T, open func(t *testing.T) instruments.Meter, hooks ...Hooks) {
	h := hooksOf(hooks)
	t.Run("identify", func(t *testing.T) { identify(t, open(t)) })
	t.Run("reset", func(t *testing.T) { reset(t, open(t)) })
	t.Run("configure", func(t *testing.T) {
		m := open(t)
		mc, ok := m.(instruments.MeterConfigurer)
		if !ok {
			t.Skip("not a MeterConfigurer")
		}
		ctx := bgCtx(t)
		if err := mc.Configure(ctx, 10, 1); err != nil {
			t.Fatalf("Configure(10 V, 1 PLC): %v", err)
		}
		if err := mc.Configure(ctx, 0, 0.1); err != nil {
			t.Fatalf("Configure(auto, 0.1 PLC): %v", err)
		}
		if err := mc.Configure(ctx, -1, 1); err == nil {
			t.Fatal("Configure(-1 V) accepted")
		}
		if h.BadRange != 0 {
			wantInstrumentError(t, h, "Configure(bad range)", mc.Configure(ctx, h.BadRange, 1))
		}
		if err := mc.Configure(ctx, 10, 0.1); err != nil {
			t.Fatalf("Configure after a refused request: %v", err)
		}
	})
	t.Run("function", func(t *testing.T) {
		m := open(t)
		fs, ok := m.(instruments.FunctionSetter)
		if !ok {
			t.Skip("not a FunctionSetter")
		}
		mc, _ := m.(instruments.MeterConfigurer)
		ctx := bgCtx(t)
		for _, f := range []instruments.Function{instruments.FuncCurrent, instruments.FuncVoltage} {
			if err := fs.SetFunction(ctx, f); err != nil {
				t.Fatalf("SetFunction(%s): %v", f, err)
			}
			if mc != nil {
				if err := mc.Configure(ctx, 0, 1); err != nil {
					t.Fatalf("Configure(auto, 1 PLC) in %s: %v", f, err)
				}
			}
			if rs, err := m.Read(ctx, 2); err != nil || len(rs) != 2 {
				t.Fatalf("Read(2) in %s: %d readings, %v", f, len(rs), err)
			}
		}
		if err := fs.SetFunction(ctx, "resistance"); err == nil {
			t.Fatal("SetFunction(resistance) accepted")
		}
	})
	t.Run("read", func(t *testing.T) {
		m, ctx := open(t), bgCtx(t)
		for _, n := range []int{1, 5, 1} {
			rs, err := m.Read(ctx, n)
			if err != nil {
				t.Fatalf("Read(%d): %v", n, err)
			}
			if len(rs) != n {
				t.Fatalf("Read(%d) gave %d readings", n, len(rs))
			}
			for i, r := range rs {
				if r.Time.IsZero() || i > 0 && r.Time.Before(rs[i-1].Time) {
					t.Fatalf("Read(%d): reading %d time %v: want set and not before the one before", n, i, r.Time)
				}
				if r.Flag == instruments.FlagNone && !r.Valid() {
					t.Fatalf("Read(%d): reading %d is unflagged but not a finite number: %v", n, i, r.Value)
				}
			}
		}
		if _, err := m.Read(ctx, 0); err == nil {
			t.Fatal("Read(0) accepted")
		}
	})
	t.Run("cancel", func(t *testing.T) {
		m := open(t)
		preCancelled(t, "Read", func(ctx context.Context) error { _, err := m.Read(ctx, 1); return err })
		if h.Silence != nil {
			h.Silence(t)
			cancelled(t, "Read from a silent peer", false, func(ctx context.Context) error { _, err := m.Read(ctx, 1); return err })
			return
		}
		cancelled(t, "a long Read", true, func(ctx context.Context) error { _, err := m.Read(ctx, h.LongRead); return err })
	})
	t.Run("timeout", func(t *testing.T) {
		if h.Silence == nil {
			t.Skip("no Silence hook")
		}
		m := open(t)
		h.Silence(t)
		timed(t, h, "Read", func(ctx context.Context) error { _, err := m.Read(ctx, 1); return err })
	})
	t.Run("close twice", func(t *testing.T) { closeTwice(t, open(t)) })
}

// TrimPort runs the suite on a DUT trim port that holds a unit.
func TrimPort(t *testing.T, open func(t *testing.T) instruments.TrimPort, hooks ...Hooks) {
	h := hooksOf(hooks)
	t.Run("identify", func(t *testing.T) { identify(t, open(t)) })
	t.Run("query and command", func(t *testing.T) {
		p, ctx := open(t), bgCtx(t)
		r, err := p.Query(ctx, h.Probe)
		if err != nil || r == "" {
			t.Fatalf("Query(%q) = %q, %v: want a reply", h.Probe, r, err)
		}
		if strings.ContainsAny(r, "\r\n") {
			t.Fatalf("Query(%q) = %q: the terminator must be removed", h.Probe, r)
		}
		if err := p.Command(ctx, h.Command); err != nil {
			t.Fatalf("Command(%q): %v", h.Command, err)
		}
	})
	t.Run("rejects", func(t *testing.T) {
		p, ctx := open(t), bgCtx(t)
		if err := p.Command(ctx, h.Bad); err == nil {
			t.Fatalf("Command(%q) accepted", h.Bad)
		}
		if _, err := p.Query(ctx, h.Bad); err == nil {
			t.Fatalf("Query(%q) accepted", h.Bad)
		}
		if r, err := p.Query(ctx, h.Probe); err != nil || r == "" {
			t.Fatalf("Query(%q) after a refused line = %q, %v", h.Probe, r, err)
		}
	})
	t.Run("cancel", func(t *testing.T) {
		p := open(t)
		preCancelled(t, "Query", func(ctx context.Context) error { _, err := p.Query(ctx, h.Probe); return err })
		if h.Silence != nil {
			h.Silence(t)
			cancelled(t, "Query to a silent peer", false, func(ctx context.Context) error { _, err := p.Query(ctx, h.Probe); return err })
		}
	})
	t.Run("timeout", func(t *testing.T) {
		if h.Silence == nil {
			t.Skip("no Silence hook")
		}
		p := open(t)
		h.Silence(t)
		timed(t, h, "Query", func(ctx context.Context) error { _, err := p.Query(ctx, h.Probe); return err })
		timed(t, h, "Command", func(ctx context.Context) error { return p.Command(ctx, h.Command) })
	})
	t.Run("close twice", func(t *testing.T) { closeTwice(t, open(t)) })
}

// Switch runs the suite on a switch (a relay multiplexer).
func Switch(t *testing.T, open func(t *testing.T) instruments.Switch, hooks ...Hooks) {
	h := hooksOf(hooks)
	if h.Channel == "" {
		h.Channel = "1"
	}
	if h.BadChannel == "" {
		h.BadChannel = "99"
	}
	t.Run("identify", func(t *testing.T) { identify(t, open(t)) })
	t.Run("reset", func(t *testing.T) { reset(t, open(t)) })
	t.Run("route", func(t *testing.T) {
		s, ctx := open(t), bgCtx(t)
		if err := s.Route(ctx, h.Channel); err != nil {
			t.Fatalf("Route(%q): %v", h.Channel, err)
		}
		if err := s.Route(ctx, h.Channel); err != nil {
			t.Fatalf("Route(%q) again: %v", h.Channel, err)
		}
		wantInstrumentError(t, h, "Route(bad channel)", s.Route(ctx, h.BadChannel))
		if err := s.Release(ctx); err != nil {
			t.Fatalf("Release after a refused route: %v", err)
		}
		if err := s.Release(ctx); err != nil {
			t.Fatalf("Release twice: %v", err)
		}
		if err := s.Route(ctx, ""); err == nil {
			t.Fatal("Route(\"\") accepted")
		}
	})
	t.Run("cancel", func(t *testing.T) {
		s := open(t)
		preCancelled(t, "Route", func(ctx context.Context) error { return s.Route(ctx, h.Channel) })
	})
	t.Run("timeout", func(t *testing.T) {
		if h.Silence == nil {
			t.Skip("no Silence hook")
		}
		s := open(t)
		h.Silence(t)
		timed(t, h, "Route", func(ctx context.Context) error { return s.Route(ctx, h.Channel) })
	})
	t.Run("close twice", func(t *testing.T) { closeTwice(t, open(t)) })
}

// Thermal runs the suite on a thermal (a chamber or hot plate): set a point and
// read a finite temperature, a refused set point (with the instrument's own error
// when Hooks.ErrorQueue) leaves the thermal working, NaN is refused, a
// StableReporter answers, cancellation and timeout of a read, and Close twice.
func Thermal(t *testing.T, open func(t *testing.T) instruments.Thermal, hooks ...Hooks) {
	h := hooksOf(hooks)
	if h.SetPoint == 0 {
		h.SetPoint = 30
	}
	t.Run("identify", func(t *testing.T) { identify(t, open(t)) })
	t.Run("reset", func(t *testing.T) { reset(t, open(t)) })
	t.Run("set and read", func(t *testing.T) {
		th, ctx := open(t), bgCtx(t)
		if err := th.SetTemperature(ctx, h.SetPoint); err != nil {
			t.Fatalf("SetTemperature(%g): %v", h.SetPoint, err)
		}
		for range 3 {
			v, err := th.Temperature(ctx)
			if err != nil {
				t.Fatalf("Temperature: %v", err)
			}
			if math.IsNaN(v) || v < -273.15 || v > 2000 {
				t.Fatalf("Temperature = %g °C, want a finite temperature above absolute zero", v)
			}
		}
		if sr, ok := th.(instruments.StableReporter); ok {
			if _, err := sr.Stable(ctx); err != nil {
				t.Fatalf("Stable: %v", err)
			}
		}
	})
	t.Run("refused", func(t *testing.T) {
		th, ctx := open(t), bgCtx(t)
		if err := th.SetTemperature(ctx, math.NaN()); err == nil {
			t.Fatal("SetTemperature(NaN) accepted")
		}
		if h.BadSetPoint != 0 {
			wantInstrumentError(t, h, "SetTemperature(bad set point)", th.SetTemperature(ctx, h.BadSetPoint))
		}
		// The engine returns the thermal to its safe temperature after any error.
		if err := th.SetTemperature(ctx, h.SetPoint); err != nil {
			t.Fatalf("SetTemperature after a refusal: %v", err)
		}
	})
	t.Run("cancel", func(t *testing.T) {
		th := open(t)
		preCancelled(t, "Temperature", func(ctx context.Context) error { _, err := th.Temperature(ctx); return err })
	})
	t.Run("timeout", func(t *testing.T) {
		if h.Silence == nil {
			t.Skip("no Silence hook")
		}
		th := open(t)
		h.Silence(t)
		timed(t, h, "Temperature", func(ctx context.Context) error { _, err := th.Temperature(ctx); return err })
	})
	t.Run("close twice", func(t *testing.T) { closeTwice(t, open(t)) })
}
