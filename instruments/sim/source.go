package sim

import (
	"context"
	"errors"
	"fmt"
	"math"
	"time"

	"trimline/instruments"
)

// Source is the simulated DC voltage source at sim://source. Its actual output is
// level·(1 + GainError) + OffsetError when on, plus white noise per meter reading;
// off, the DUT input is shorted to 0 V.
type Source struct {
	bench      *Bench
	latency    time.Duration
	rng        float64 // V, full-scale range; |level| must not exceed it
	gainErr    float64 // fraction
	offsetErr  float64 // V
	noise      float64 // V rms per reading
	level      float64 // V, programmed
	on         bool
	compliance float64 // A
	closed     bool
}

var (
	_ instruments.Source      = (*Source)(nil)
	_ instruments.Identifier  = (*Source)(nil)
	_ instruments.Resetter    = (*Source)(nil)
	_ instruments.ClockSource = (*Source)(nil)
)

// defaultCompliance is the source's current limit after reset, in amperes.
const defaultCompliance = 10e-3

// maxCompliance is the largest current limit the source accepts, in amperes.
const maxCompliance = 0.1

func newSource(b *Bench, c config) *Source {
	r := streamRand("source", b.seed)
	uGain, uOfs := uniform(r), uniform(r)
	s := &Source{
		bench:      b,
		latency:    c.latency,
		rng:        c.source.rng,
		gainErr:    uGain * c.source.specReading,
		offsetErr:  uOfs * c.source.specRange * c.source.rng,
		noise:      c.source.noise,
		compliance: defaultCompliance,
	}
	if c.source.gainError != nil {
		s.gainErr = *c.source.gainError
	}
	if c.source.offset != nil {
		s.offsetErr = *c.source.offset
	}
	return s
}

var errSourceClosed = errors.New("sim source: closed")

// actual returns the noiseless voltage at the output terminals in V (0 when off).
func (s *Source) actual() float64 {
	if !s.on {
		return 0
	}
	return s.level*(1+s.gainErr) + s.offsetErr
}

// Errors returns the source's gain error (fraction) and offset error (V): actual =
// programmed·(1 + gain) + offset.
func (s *Source) Errors() (gain, offset float64) { return s.gainErr, s.offsetErr }

// Range returns the source's full-scale range in volts (the range setting, 100 mV by
// default); SetLevel refuses a level beyond it.
func (s *Source) Range() float64 { return s.rng }

// Clock returns the bench clock.
func (s *Source) Clock() instruments.Clock { return s.bench.clock }

// SetLevel programs the output level in volts (|volts| ≤ the source range, 100 mV by
// default). When the output is on, the DUT input steps at this instant.
func (s *Source) SetLevel(ctx context.Context, volts float64) error {
	b := s.bench
	b.mu.Lock()
	defer b.mu.Unlock()
	if s.closed {
		return errSourceClosed
	}
	if math.IsNaN(volts) || math.IsInf(volts, 0) || math.Abs(volts) > s.rng {
		return fmt.Errorf("sim source: level %g V outside the ±%g V range", volts, s.rng)
	}
	if err := b.advance(ctx, s.latency); err != nil {
		return fmt.Errorf("sim source: set level: %w", err)
	}
	old := b.dutInput()
	s.level = volts
	b.inputChanged(old)
	return nil
}

// SetOutput switches the output on or off. Switching off always succeeds, also on a
// closed source or a done ctx.
func (s *Source) SetOutput(ctx context.Context, on bool) error {
	b := s.bench
	b.mu.Lock()
	defer b.mu.Unlock()
	if !on {
		old := b.dutInput()
		s.on = false
		b.inputChanged(old)
		b.advance(context.WithoutCancel(ctx), s.latency)
		return nil
	}
	if s.closed {
		return errSourceClosed
	}
	if err := b.advance(ctx, s.latency); err != nil {
		return fmt.Errorf("sim source: output on: %w", err)
	}
	old := b.dutInput()
	s.on = true
	b.inputChanged(old)
	return nil
}

// SetCompliance sets the current limit in amperes (0 < amps ≤ 100 mA). The DUT
// input draws no current, so the limit is never reached.
func (s *Source) SetCompliance(ctx context.Context, amps float64) error {
	b := s.bench
	b.mu.Lock()
	defer b.mu.Unlock()
	if s.closed {
		return errSourceClosed
	}
	if !(amps > 0 && amps <= maxCompliance) {
		return fmt.Errorf("sim source: compliance %g A outside 0 < I ≤ %g A", amps, maxCompliance)
	}
	if err := b.advance(ctx, s.latency); err != nil {
		return fmt.Errorf("sim source: set compliance: %w", err)
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

// Reset puts the source in its safe state: output off, level 0 V, compliance 10 mA.
func (s *Source) Reset(ctx context.Context) error {
	b := s.bench
	b.mu.Lock()
	defer b.mu.Unlock()
	if s.closed {
		return errSourceClosed
	}
	if err := b.advance(ctx, s.latency); err != nil {
		return fmt.Errorf("sim source: reset: %w", err)
	}
	old := b.dutInput()
	s.on, s.level, s.compliance = false, 0, defaultCompliance
	b.inputChanged(old)
	return nil
}

// Identify returns the source's invented identity.
func (s *Source) Identify(ctx context.Context) (instruments.Identity, error) {
	b := s.bench
	b.mu.Lock()
	defer b.mu.Unlock()
	if s.closed {
		return instruments.Identity{}, errSourceClosed
	}
	if err := b.advance(ctx, s.latency); err != nil {
		return instruments.Identity{}, fmt.Errorf("sim source: identify: %w", err)
	}
	return instruments.Identity{Maker: Maker, Model: "VS-100M", Serial: fmt.Sprintf("VS%06d", b.seed%1000000), Firmware: "1.0"}, nil
}

// Close switches the output off and closes the source; later calls return an error
// (except SetOutput(false)). A second Close returns nil.
func (s *Source) Close() error {
	b := s.bench
	b.mu.Lock()
	defer b.mu.Unlock()
	if !s.closed {
		old := b.dutInput()
		s.on = false
		b.inputChanged(old)
		s.closed = true
	}
	return nil
}

// State returns whether the output is on and the programmed level in volts, for
// tests that check the engine left the bench safe.
func (s *Source) State() (on bool, level float64) {
	s.bench.mu.Lock()
	defer s.bench.mu.Unlock()
	return s.on, s.level
}
