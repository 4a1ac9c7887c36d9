package generic

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strings"
	"sync"
	"time"

	"trimline/instruments"
	"trimline/instruments/scpi"
)

// Source is a DC voltage source driven by templates (see the package doc).
type Source struct {
	base
	rangeV float64 // volts programmed with set_range; 0 = never

	mu       sync.Mutex
	closed   bool
	closeErr error // the output-off result of Close
}

var (
	_ instruments.Source     = (*Source)(nil)
	_ instruments.Identifier = (*Source)(nil)
	_ instruments.Resetter   = (*Source)(nil)
	_ instruments.ErrorQueue = (*Source)(nil)
	_ Querier                = (*Source)(nil)
)

func (s *Source) open(ctx context.Context, reset bool) error {
	if err := s.prepare(ctx, reset); err != nil {
		return err
	}
	return s.programRange(ctx)
}

func (s *Source) programRange(ctx context.Context) error {
	if s.rangeV > 0 && s.tpl["set_range"] != "" {
		return s.exec(ctx, "set_range", "{volts}", num(s.rangeV))
	}
	return nil
}

// Identify sends the identify template (*IDN?) and parses the reply strictly.
func (s *Source) Identify(ctx context.Context) (instruments.Identity, error) { return s.identify(ctx) }

// Reset clears the instrument, sends the reset template (*RST: by IEEE 488.2 the
// output is then off), waits for it (*OPC?), drains the error queue and programs the
// range setting again.
func (s *Source) Reset(ctx context.Context) error {
	if err := s.prepare(ctx, true); err != nil {
		return err
	}
	return s.programRange(ctx)
}

// CheckErrors reads the error queue (error_query until 0) and returns the first
// entry as a *scpi.InstrumentError; nil when the queue was empty.
func (s *Source) CheckErrors(ctx context.Context) error { return s.checkErrors(ctx) }

// SetLevel programs volts (finite) with set_level, drains the error queue and reads
// the level back with get_level; a difference of more than 1e-9 relative or 1 nV is
// an error wrapping ErrReadback. It does not switch the output on.
func (s *Source) SetLevel(ctx context.Context, volts float64) error {
	if !finite(volts) {
		return fmt.Errorf("%s: set level %g V: not a finite voltage", s.addr, volts)
	}
	return s.program(ctx, "set_level", "{volts}", "get_level", "level", "V", volts, 1e-9)
}

// program writes v with the set command (its value in place of key), drains the
// error queue and reads v back with the get query: a difference of more than
// 1e-9 relative and absTol is an error wrapping ErrReadback. what ("level",
// "current") and unit ("V", "A") word the errors.
func (s *Source) program(ctx context.Context, set, key, get, what, unit string, v, absTol float64) error {
	if err := s.exec(ctx, set, key, num(v)); err != nil {
		return err
	}
	got, err := s.sess.QueryFloat(ctx, s.tpl[get])
	if err != nil {
		return fmt.Errorf("%s: read back %s: %w", s.addr, what, err)
	}
	if d := math.Abs(got - v); d > absTol && d > 1e-9*math.Abs(v) {
		return fmt.Errorf("%s: %s set to %s %s reads back %s %s: %w", s.addr, what, num(v), unit, num(got), unit, ErrReadback)
	}
	return nil
}

// SetCompliance programs the current limit in amperes (finite, > 0) with
// set_compliance and drains the error queue.
func (s *Source) SetCompliance(ctx context.Context, amps float64) error {
	if !finite(amps) || amps <= 0 {
		return fmt.Errorf("%s: compliance %g A: expected a positive current", s.addr, amps)
	}
	return s.exec(ctx, "set_compliance", "{amps}", num(amps))
}

// SetOutput switches the output with output_on or output_off, drains the error queue
// and reads the state back with get_output (1/0 or ON/OFF). Switching off runs on a
// fresh context bounded by three exchange timeouts, whatever ctx and earlier errors
// say, and reconnects a dropped link first; after Close it returns the result of the
// switch-off Close did.
func (s *Source) SetOutput(ctx context.Context, on bool) error {
	if !on {
		s.mu.Lock()
		closed, cerr := s.closed, s.closeErr
		s.mu.Unlock()
		if closed {
			return cerr
		}
		return s.off(ctx)
	}
	if err := s.exec(ctx, "output_on"); err != nil {
		return err
	}
	return s.checkOutput(ctx, true)
}

func (s *Source) off(ctx context.Context) error {
	octx, cancel := context.WithTimeout(context.WithoutCancel(ctx), 3*s.timeout)
	defer cancel()
	if err := s.exec(octx, "output_off"); err != nil {
		return err
	}
	return s.checkOutput(octx, false)
}

func (s *Source) checkOutput(ctx context.Context, want bool) error {
	r, err := s.sess.Query(ctx, s.tpl["get_output"])
	if err != nil {
		return fmt.Errorf("%s: read back output state: %w", s.addr, err)
	}
	var got bool
	switch strings.ToUpper(strings.TrimSpace(r)) {
	case "1", "+1", "ON":
		got = true
	case "0", "+0", "OFF":
	default:
		return fmt.Errorf("%s: output state %q is not 1/0 or ON/OFF: %w", s.addr, r, scpi.ErrMalformed)
	}
	if got != want {
		return fmt.Errorf("%s: output switched %s reads back %s: %w", s.addr, onOff(want), onOff(got), ErrReadback)
	}
	return nil
}

func onOff(b bool) string {
	if b {
		return "on"
	}
	return "off"
}

// Close switches the output off (as SetOutput(ctx, false) does) and closes the link.
// It returns the switch-off error, if any; a second call returns nil.
func (s *Source) Close() error {
	s.mu.Lock()
	if s.closed {
		s.mu.Unlock()
		return nil
	}
	s.mu.Unlock()
	err := s.off(context.Background())
	s.mu.Lock()
	s.closed, s.closeErr = true, err
	s.mu.Unlock()
	if cerr := s.sess.Close(); err == nil && cerr != nil && !errors.Is(cerr, context.Canceled) {
		err = cerr
	}
	return err
}

// WatchdogSource is a Source whose output watchdog the station file's templates arm
// (arm_watchdog, disarm_watchdog; the watchdog setting is its time).
type WatchdogSource struct {
	*Source
	timeout time.Duration
}

var _ instruments.OutputWatchdog = (*WatchdogSource)(nil)

// ArmWatchdog sends arm_watchdog with {seconds} the watchdog setting and drains the
// error queue: the source must then be armed again within that time or it
// switches its output off by itself.
func (w *WatchdogSource) ArmWatchdog(ctx context.Context) error {
	return w.exec(ctx, "arm_watchdog", "{seconds}", num(w.timeout.Seconds()))
}

// DisarmWatchdog sends disarm_watchdog and drains the error queue; without that
// template it does nothing (the watchdog then runs out with the output already
// off, which changes nothing).
func (w *WatchdogSource) DisarmWatchdog(ctx context.Context) error {
	if w.tpl["disarm_watchdog"] == "" {
		return nil
	}
	return w.exec(ctx, "disarm_watchdog")
}

// CurrentSource is a Source opened as kind current_source: it drives a current
// (instruments.CurrentSource) with the templates current_mode, set_current,
// get_current and set_voltage_limit.
type CurrentSource struct {
	*Source

	modeMu    sync.Mutex
	inCurrent bool // current_mode was sent since open or the last Reset
}

var _ instruments.CurrentSource = (*CurrentSource)(nil)

// Reset resets the source as Source.Reset does; the next SetCurrent selects
// current mode again.
func (s *CurrentSource) Reset(ctx context.Context) error {
	s.modeMu.Lock()
	s.inCurrent = false
	s.modeMu.Unlock()
	return s.Source.Reset(ctx)
}

// SetCurrent selects current mode (current_mode, once after open or Reset),
// programs amps (finite) with set_current, drains the error queue and reads the
// current back with get_current; a difference of more than 1e-9 relative or
// 1 pA is an error wrapping ErrReadback. It does not switch the output on.
func (s *CurrentSource) SetCurrent(ctx context.Context, amps float64) error {
	if !finite(amps) {
		return fmt.Errorf("%s: set current %g A: not a finite current", s.addr, amps)
	}
	s.modeMu.Lock()
	defer s.modeMu.Unlock()
	if !s.inCurrent {
		if err := s.exec(ctx, "current_mode"); err != nil {
			return err
		}
		s.inCurrent = true
	}
	return s.program(ctx, "set_current", "{amps}", "get_current", "current", "A", amps, 1e-12)
}

// SetVoltageLimit programs the compliance voltage in volts (finite, > 0) with
// set_voltage_limit and drains the error queue.
func (s *CurrentSource) SetVoltageLimit(ctx context.Context, volts float64) error {
	if !finite(volts) || volts <= 0 {
		return fmt.Errorf("%s: compliance voltage %g V: expected a positive voltage", s.addr, volts)
	}
	return s.exec(ctx, "set_voltage_limit", "{volts}", num(volts))
}

// WatchdogCurrentSource is a CurrentSource with an output watchdog, as
// WatchdogSource is for a voltage source.
type WatchdogCurrentSource struct {
	*CurrentSource
	timeout time.Duration
}

var _ instruments.OutputWatchdog = (*WatchdogCurrentSource)(nil)

// ArmWatchdog is WatchdogSource.ArmWatchdog.
func (w *WatchdogCurrentSource) ArmWatchdog(ctx context.Context) error {
	return (&WatchdogSource{Source: w.Source, timeout: w.timeout}).ArmWatchdog(ctx)
}

// DisarmWatchdog is WatchdogSource.DisarmWatchdog.
func (w *WatchdogCurrentSource) DisarmWatchdog(ctx context.Context) error {
	return (&WatchdogSource{Source: w.Source, timeout: w.timeout}).DisarmWatchdog(ctx)
}
