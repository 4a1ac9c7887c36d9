package sim

import (
	"context"
	"errors"
	"fmt"
	"strconv"

	"trimline/instruments"
)

// SwitchChannels is how many channels the simulated multiplexer has when the bench
// holds no DUT to say how many the card has.
const SwitchChannels = MaxChannels

// Switch is the simulated relay multiplexer at sim://switch (model RM-16). Route
// closes the path of one channel of the card in the fixture (the source drives its
// input, the meter reads its output) and opens every other; Release opens all: every
// channel's input is shorted to 0 V and the meter reads ≈ 0. It powers up released.
// A change of routing is a step of the inputs the channels settle after.
type Switch struct {
	wiring
}

var (
	_ instruments.Switch      = (*Switch)(nil)
	_ instruments.Identifier  = (*Switch)(nil)
	_ instruments.Resetter    = (*Switch)(nil)
	_ instruments.ClockSource = (*Switch)(nil)
)

var errSwitchClosed = errors.New("sim switch: closed")

// Clock returns the bench clock.
func (s *Switch) Clock() instruments.Clock { return s.bench.clock }

// Route connects channel ("1".."N", N the card's channels setting, or 16 without a
// DUT on the bench) and disconnects every other. Another name is an error naming
// the channels there are.
func (s *Switch) Route(ctx context.Context, channel string) error {
	b := s.bench
	n := SwitchChannels
	if b.dut != nil {
		n = b.dut.card.channels
	}
	k, err := strconv.Atoi(channel)
	var invalid error
	if err != nil || k < 1 || k > n || strconv.Itoa(k) != channel {
		invalid = fmt.Errorf("sim switch: route %q: expected a channel 1 to %d", channel, n)
	}
	b.mu.Lock()
	defer b.mu.Unlock()
	if err := s.start(ctx, "route "+strconv.Quote(channel), invalid); err != nil {
		return err
	}
	s.set(k - 1)
	return nil
}

// Release opens every path. It works after Close too, like a source's switch-off.
func (s *Switch) Release(ctx context.Context) error {
	b := s.bench
	b.mu.Lock()
	defer b.mu.Unlock()
	if s.closed {
		s.set(-1)
		return nil
	}
	if err := s.start(ctx, "release", nil); err != nil {
		return err
	}
	s.set(-1)
	return nil
}

// Reset releases every path.
func (s *Switch) Reset(ctx context.Context) error { return s.Release(ctx) }

// Routed returns the routed channel ("1".."N"), "" when released.
func (s *Switch) Routed() string {
	s.bench.mu.Lock()
	defer s.bench.mu.Unlock()
	if s.bench.route < 0 {
		return ""
	}
	return strconv.Itoa(s.bench.route + 1)
}

// set routes the 0-based channel k (−1: none) and lets the inputs step. Called with
// the bench lock held.
func (s *Switch) set(k int) {
	b := s.bench
	old := b.inputs()
	b.route = k
	b.inputsChanged(b.clock.Now(), old)
}

// Identify returns the switch's invented identity.
func (s *Switch) Identify(ctx context.Context) (instruments.Identity, error) {
	return s.identify(ctx, "RM-16", "RM")
}

// Close releases every path and closes the switch; later calls but Release return
// an error. A second Close returns nil.
func (s *Switch) Close() error {
	s.bench.mu.Lock()
	defer s.bench.mu.Unlock()
	if !s.closed {
		s.set(-1)
		s.closed = true
	}
	return nil
}
