package sim

import (
	"context"
	"errors"
	"fmt"
	"math"
	"time"

	"trimline/instruments"
)

// Source is the simulated DC source at sim://source. In voltage mode (after
// reset, and after SetLevel) its actual output is level·(1 + GainError) +
// OffsetError when on, and the DUT input sees that plus the thermal EMF of the
// wiring between them, plus white noise per meter reading; off, the fixture
// relay shorts the DUT input to a true 0 V. In current mode (after SetCurrent, instruments.CurrentSource)
// it drives amps·(1 + GainError) + its current offset into the DUT input, the
// voltage across it held within the compliance voltage (SetVoltageLimit).
type Source struct {
	wiring
	rng       float64 // V, full-scale range; |level| must not exceed it
	gainErr   float64 // fraction
	offsetErr float64 // V
	// emf is the thermal EMF of the wiring from the source to the DUT input, V:
	// in series with the output while it is on, absent when off (the fixture
	// relay shorts the DUT input at the DUT).
	emf        float64
	noise      float64 // V rms per reading
	level      float64 // V, programmed
	on         bool
	compliance float64 // A

	// Current mode.
	current    bool    // SetCurrent put the source in current mode
	amps       float64 // A, programmed
	iRng       float64 // A, current range; |amps| must not exceed it
	iOffsetErr float64 // A
	iNoise     float64 // A rms per reading
	vLimit     float64 // V, compliance voltage

	// The output watchdog: while armed, the output switches off and the level goes
	// to 0 V at wdDeadline unless it is armed again before.
	wdArmed    bool
	wdTimeout  time.Duration
	wdDeadline time.Time
	wdTrips    int // expiries that switched an output off
}

var (
	_ instruments.Source      = (*Source)(nil)
	_ instruments.Identifier  = (*Source)(nil)
	_ instruments.Resetter    = (*Source)(nil)
	_ instruments.ClockSource = (*Source)(nil)

	_ instruments.CurrentSource = (*Source)(nil)
)

// defaultVoltageLimit is the source's compliance voltage after reset, in volts.
const defaultVoltageLimit = 10.0

// maxVoltageLimit is the largest compliance voltage the source accepts, in volts.
const maxVoltageLimit = 30.0

// defaultCompliance is the source's current limit after reset, in amperes.
const defaultCompliance = 10e-3

// maxCompliance is the largest current limit the source accepts, in amperes.
const maxCompliance = 0.1

func newSource(b *Bench, c config) *Source {
	r := streamRand("source", b.seed)
	uGain, uOfs := uniform(r), uniform(r)
	uEMF := uniform(r) // after the older draws, so they are unchanged
	s := &Source{
		wiring:     wiring{bench: b, latency: c.latency, name: "sim source", errClosed: errSourceClosed},
		rng:        c.source.rng,
		gainErr:    uGain * c.source.specReading,
		offsetErr:  uOfs * c.source.specRange * c.source.rng,
		emf:        uEMF * c.source.emfSpan,
		noise:      c.source.noise,
		compliance: defaultCompliance,
		iRng:       c.source.iRng,
		iOffsetErr: uOfs * c.source.specRange * c.source.iRng, // the same draw: voltage benches are unchanged
		iNoise:     c.source.iNoise,
		vLimit:     defaultVoltageLimit,
	}
	if c.source.gainError != nil {
		s.gainErr = *c.source.gainError
	}
	if c.source.offset != nil {
		s.offsetErr = *c.source.offset
	}
	if c.source.iOffset != nil {
		s.iOffsetErr = *c.source.iOffset
	}
	if c.source.emf != nil {
		s.emf = *c.source.emf
	}
	return s
}

var errSourceClosed = errors.New("sim source: closed")

// actual returns the noiseless voltage at the output terminals in V (0 when off)
// in voltage mode.
func (s *Source) actual() float64 {
	if !s.on {
		return 0
	}
	return s.level*(1+s.gainErr) + s.offsetErr
}

// into returns the noiseless voltage the source puts across a DUT input of
// resistance ohms (0: a high-impedance voltage input), 0 when off. In voltage
// mode it is the output voltage, held down so that the current stays within the
// compliance; in current mode the current times the resistance, held within the
// compliance voltage (into a high-impedance input the voltage runs to it).
func (s *Source) into(ohms float64) float64 {
	if !s.on {
		return 0
	}
	if !s.current {
		v := s.actual() + s.emf
		if ohms > 0 && math.Abs(v) > s.compliance*ohms {
			v = math.Copysign(s.compliance*ohms, v)
		}
		return v
	}
	i := s.amps*(1+s.gainErr) + s.iOffsetErr
	if ohms == 0 {
		if i == 0 {
			return 0
		}
		return math.Copysign(s.vLimit, i)
	}
	return max(-s.vLimit, min(s.vLimit, i*ohms))
}

// noiseInto is the rms noise in V per reading the source adds across a DUT
// input of resistance ohms (0: high impedance), as into.
func (s *Source) noiseInto(ohms float64) float64 {
	if !s.current {
		return s.noise
	}
	return s.iNoise * ohms
}

// Errors returns the source's gain error (fraction) and offset error (V): actual =
// programmed·(1 + gain) + offset.
func (s *Source) Errors() (gain, offset float64) { return s.gainErr, s.offsetErr }

// ThermalEMF returns the thermal EMF of the wiring from the source to the DUT
// input in V: in voltage mode with the output on, the DUT input is the actual
// output plus it (a current source drives through it).
func (s *Source) ThermalEMF() float64 { return s.emf }

// Range returns the source's full-scale range in volts (the range setting, 100 mV by
// default); SetLevel refuses a level beyond it.
func (s *Source) Range() float64 { return s.rng }

// Clock returns the bench clock.
func (s *Source) Clock() instruments.Clock { return s.bench.clock }

// drive sets the output state and level; when that moves the DUT input, the DUT
// starts settling towards the new input now. Called with the bench lock held.
func (s *Source) drive(on bool, level float64) {
	old := s.bench.inputs()
	s.on, s.level = on, level
	s.bench.inputsChanged(s.bench.clock.Now(), old)
}

// SetLevel programs the output level in volts (|volts| ≤ the source range, 100 mV by
// default). When the output is on, the DUT input steps at this instant.
func (s *Source) SetLevel(ctx context.Context, volts float64) error {
	var invalid error
	if math.IsNaN(volts) || math.IsInf(volts, 0) || math.Abs(volts) > s.rng {
		invalid = fmt.Errorf("sim source: level %g V outside the ±%g V range", volts, s.rng)
	}
	s.bench.mu.Lock()
	defer s.bench.mu.Unlock()
	if err := s.start(ctx, "set level", invalid); err != nil {
		return err
	}
	s.current = false
	s.drive(s.on, volts)
	return nil
}

// SetCurrent programs the output current in amperes (|amps| ≤ the current
// range, 25 mA by default) and puts the source in current mode. When the
// output is on, the DUT input steps at this instant.
func (s *Source) SetCurrent(ctx context.Context, amps float64) error {
	var invalid error
	if math.IsNaN(amps) || math.IsInf(amps, 0) || math.Abs(amps) > s.iRng {
		invalid = fmt.Errorf("sim source: current %g A outside the ±%g A range", amps, s.iRng)
	}
	s.bench.mu.Lock()
	defer s.bench.mu.Unlock()
	if err := s.start(ctx, "set current", invalid); err != nil {
		return err
	}
	old := s.bench.inputs()
	s.current, s.amps = true, amps
	s.bench.inputsChanged(s.bench.clock.Now(), old)
	return nil
}

// SetVoltageLimit sets the compliance voltage of current mode in volts
// (0 < volts ≤ 30 V).
func (s *Source) SetVoltageLimit(ctx context.Context, volts float64) error {
	var invalid error
	if !(volts > 0 && volts <= maxVoltageLimit) {
		invalid = fmt.Errorf("sim source: compliance voltage %g V outside 0 < V ≤ %g V", volts, maxVoltageLimit)
	}
	s.bench.mu.Lock()
	defer s.bench.mu.Unlock()
	if err := s.start(ctx, "set voltage limit", invalid); err != nil {
		return err
	}
	old := s.bench.inputs()
	s.vLimit = volts
	s.bench.inputsChanged(s.bench.clock.Now(), old)
	return nil
}

// CurrentState returns whether the source is in current mode, the programmed
// current in amperes and the compliance voltage in volts, for tests.
func (s *Source) CurrentState() (current bool, amps, voltageLimit float64) {
	s.bench.mu.Lock()
	defer s.bench.mu.Unlock()
	s.bench.watchdog()
	return s.current, s.amps, s.vLimit
}

// CurrentErrors returns the source's current offset in amperes (the gain error
// is Errors' gain): actual = programmed·(1 + gain) + offset.
func (s *Source) CurrentErrors() (offset float64) { return s.iOffsetErr }

// CurrentRange returns the source's current range in amperes (25 mA by
// default); SetCurrent refuses a current beyond it.
func (s *Source) CurrentRange() float64 { return s.iRng }

// SetOutput switches the output on or off. Switching off always succeeds, also on a
// closed source or a done ctx.
func (s *Source) SetOutput(ctx context.Context, on bool) error {
	s.bench.mu.Lock()
	defer s.bench.mu.Unlock()
	s.bench.watchdog()
	if !on {
		s.drive(false, s.level)
		s.bench.advance(context.WithoutCancel(ctx), s.latency)
		return nil
	}
	if err := s.start(ctx, "output on", nil); err != nil {
		return err
	}
	s.drive(true, s.level)
	return nil
}

// SetCompliance sets the current limit in amperes (0 < amps ≤ 100 mA). The DUT
// input draws no current, so the limit is never reached.
func (s *Source) SetCompliance(ctx context.Context, amps float64) error {
	var invalid error
	if !(amps > 0 && amps <= maxCompliance) {
		invalid = fmt.Errorf("sim source: compliance %g A outside 0 < I ≤ %g A", amps, maxCompliance)
	}
	s.bench.mu.Lock()
	defer s.bench.mu.Unlock()
	if err := s.start(ctx, "set compliance", invalid); err != nil {
		return err
	}
	s.compliance = amps
	return nil
}

// Compliance returns the current limit in amperes.
func (s *Source) Compliance() float64 {
	s.bench.mu.Lock()
	defer s.bench.mu.Unlock()
	return s.compliance
}

// Reset puts the source in its safe state: output off, voltage mode, level 0 V
// and 0 A, compliance 10 mA and 10 V, output watchdog disarmed.
func (s *Source) Reset(ctx context.Context) error {
	s.bench.mu.Lock()
	defer s.bench.mu.Unlock()
	if err := s.start(ctx, "reset", nil); err != nil {
		return err
	}
	s.drive(false, 0)
	s.current, s.amps, s.vLimit = false, 0, defaultVoltageLimit
	s.compliance = defaultCompliance
	s.wdArmed = false
	return nil
}

// MaxWatchdog is the longest output-watchdog time the source accepts.
const MaxWatchdog = time.Hour

// ArmWatchdog arms the output watchdog for timeout (0 < timeout ≤ MaxWatchdog), or,
// when it is armed, restarts its time: unless it is armed again within timeout
// on the bench clock, the source switches its output off and programs 0 V by
// itself, at the instant the time ran out, as if the station had done so. A
// station that dies with the output on (kill -9, a crash, a pulled cable) so
// leaves the unit driven for at most timeout.
func (s *Source) ArmWatchdog(ctx context.Context, timeout time.Duration) error {
	var invalid error
	if timeout <= 0 || timeout > MaxWatchdog {
		invalid = fmt.Errorf("sim source: watchdog time %s outside 0 < t ≤ %s", timeout, MaxWatchdog)
	}
	s.bench.mu.Lock()
	defer s.bench.mu.Unlock()
	if err := s.start(ctx, "arm watchdog", invalid); err != nil {
		return err
	}
	s.wdArmed, s.wdTimeout, s.wdDeadline = true, timeout, s.bench.clock.Now().Add(timeout)
	return nil
}

// DisarmWatchdog stops the output watchdog; the output stays as it is.
func (s *Source) DisarmWatchdog(ctx context.Context) error {
	s.bench.mu.Lock()
	defer s.bench.mu.Unlock()
	if err := s.start(ctx, "disarm watchdog", nil); err != nil {
		return err
	}
	s.wdArmed = false
	return nil
}

// Watchdog returns whether the output watchdog is armed and its time, and how many
// times it ran out with the output on (and switched it off).
func (s *Source) Watchdog() (armed bool, timeout time.Duration, trips int) {
	s.bench.mu.Lock()
	defer s.bench.mu.Unlock()
	s.bench.watchdog()
	return s.wdArmed, s.wdTimeout, s.wdTrips
}

// expire runs the watchdog out if its time has passed by now: output off and
// level 0 V from the instant it ran out. Called with the bench lock held, before
// anything reads or changes the bench's state, so a watchdog that ran out while
// nobody talked to the bench (simulated or real time) has acted before.
func (s *Source) expire(now time.Time) {
	if !s.wdArmed || now.Before(s.wdDeadline) {
		return
	}
	s.wdArmed = false
	if s.on {
		s.wdTrips++
	}
	old := s.bench.inputs()
	s.on, s.level, s.amps = false, 0, 0
	s.bench.inputsChanged(s.wdDeadline, old)
}

// Identify returns the source's invented identity.
func (s *Source) Identify(ctx context.Context) (instruments.Identity, error) {
	return s.identify(ctx, "VS-100M", "VS")
}

// Close switches the output off and closes the source; later calls return an error
// (except SetOutput(false)). A second Close returns nil.
func (s *Source) Close() error {
	s.bench.mu.Lock()
	defer s.bench.mu.Unlock()
	s.bench.watchdog()
	if !s.closed {
		s.drive(false, s.level)
		s.closed = true
	}
	return nil
}

// State returns whether the output is on and the programmed level in volts, for
// tests that check the engine left the bench safe.
func (s *Source) State() (on bool, level float64) {
	s.bench.mu.Lock()
	defer s.bench.mu.Unlock()
	s.bench.watchdog()
	return s.on, s.level
}
