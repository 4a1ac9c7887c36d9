package generic

import (
	"context"
	"fmt"
	"math"
	"strconv"
	"strings"
	"sync"

	"trimline/instruments"
)

// Thermal is a temperature chamber or hot plate driven by templates:
// set_temperature (with {celsius}) programs the set point and is followed by a
// drain of the error queue, temperature reads the chamber's temperature in °C.
type Thermal struct {
	base

	mu     sync.Mutex
	closed bool
}

// StableThermal is a Thermal whose stable template is set: it also reports the
// chamber's own stable flag (instruments.StableReporter).
type StableThermal struct {
	*Thermal
}

var (
	_ instruments.Thermal        = (*Thermal)(nil)
	_ instruments.Identifier     = (*Thermal)(nil)
	_ instruments.Resetter       = (*Thermal)(nil)
	_ instruments.ErrorQueue     = (*Thermal)(nil)
	_ Querier                    = (*Thermal)(nil)
	_ instruments.StableReporter = (*StableThermal)(nil)
)

// SetTemperature sends set_temperature with {celsius} (a finite number) and drains
// the error queue, so a set point the chamber refuses is its own error. It is tried
// whatever happened before, on a fresh context bounded by three exchange timeouts
// when ctx is already done, as a source's switch-off is: the engine returns the
// chamber to its safe temperature on every exit path.
func (t *Thermal) SetTemperature(ctx context.Context, celsius float64) error {
	if math.IsNaN(celsius) || math.IsInf(celsius, 0) {
		return fmt.Errorf("%s: set temperature %g: expected a finite temperature in °C", t.addr, celsius)
	}
	if ctx.Err() != nil {
		var cancel context.CancelFunc
		ctx, cancel = context.WithTimeout(context.WithoutCancel(ctx), 3*t.timeout)
		defer cancel()
	}
	return t.exec(ctx, "set_temperature", "{celsius}", strconv.FormatFloat(celsius, 'g', 10, 64))
}

// Temperature sends the temperature query and parses the reply as a number in °C;
// an overload or not-a-number reply is an error.
func (t *Thermal) Temperature(ctx context.Context) (float64, error) {
	v, err := t.sess.QueryFloat(ctx, t.tpl["temperature"])
	if err != nil {
		return 0, fmt.Errorf("%s: temperature: %w", t.addr, err)
	}
	return v, nil
}

// Stable sends the stable query; the reply is 1, 0, ON, OFF, TRUE or FALSE (any
// case).
func (t *StableThermal) Stable(ctx context.Context) (bool, error) {
	r, err := t.Query(ctx, t.tpl["stable"])
	if err != nil {
		return false, err
	}
	switch strings.ToUpper(strings.TrimSpace(r)) {
	case "1", "ON", "TRUE":
		return true, nil
	case "0", "OFF", "FALSE":
		return false, nil
	}
	return false, fmt.Errorf("%s: stable: reply %q: expected 1 or 0", t.addr, r)
}

// Identify sends the identify template (*IDN?) and parses the reply strictly.
func (t *Thermal) Identify(ctx context.Context) (instruments.Identity, error) { return t.identify(ctx) }

// Reset clears the instrument, sends the reset template (*RST), waits for it and
// drains the error queue.
func (t *Thermal) Reset(ctx context.Context) error { return t.prepare(ctx, true) }

// CheckErrors reads the error queue until it is empty; see Meter.CheckErrors.
func (t *Thermal) CheckErrors(ctx context.Context) error { return t.checkErrors(ctx) }

// Close closes the link; a second call returns nil.
func (t *Thermal) Close() error {
	t.mu.Lock()
	if t.closed {
		t.mu.Unlock()
		return nil
	}
	t.closed = true
	t.mu.Unlock()
	return t.sess.Close()
}
