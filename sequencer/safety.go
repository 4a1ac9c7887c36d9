package sequencer

// The station's safety caps, checked at load and before every write to the source,
// and the safe state every exit path leaves the source in.

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strings"
	"sync"
	"time"

	"trimline/instruments"
	"trimline/instruments/units"

	"github.com/rs/zerolog"
)

// ErrSafety is wrapped by every refusal to program the source outside the
// station's caps.
var ErrSafety = errors.New("safety cap")

// ErrCalibrationExpired is what Open's and a run's refusal of an instrument
// past its calibration due date wrap: a block until the instrument is
// recalibrated, not a fault a note clears.
var ErrCalibrationExpired = errors.New("calibration expired")

// expiredError is an instrument past its calibration due date.
type expiredError struct{ msg string }

func (e *expiredError) Error() string { return e.msg }
func (e *expiredError) Unwrap() error { return ErrCalibrationExpired }

// ErrUnboundRole is wrapped when a sequence requires an instrument role the
// station does not bind: the files do not fit together, but nothing was unsafe.
var ErrUnboundRole = errors.New("unbound role")

// CheckCaps reports whether the sequence stays inside the station's safety caps
// (an error wrapping ErrSafety) and whether the station binds every role the
// sequence requires, as the kind the steps use it as, each meter with a spec for
// the quantity (voltage or current) its steps read (an error wrapping
// ErrUnboundRole); both when both fail. It
// is run at load (trimline check) and again when an Engine opens.
func CheckCaps(st *Station, seq *Sequence) error {
	var errs, unbound []string
	// Every level every step will program, as the engine computes them, through the
	// engine's own test: the two cannot disagree at the edge of the cap. One
	// message per step and cap.
	said := map[string]bool{}
	for _, x := range seq.Stimuli() {
		// A voltage source's level is capped by the voltage cap; a current
		// source's by the current cap (its compliance voltage is the voltage
		// cap, programmed at open).
		var rating, limit float64
		var format func(float64) string
		var key string // the station file's word for the quantity
		switch x.Dim {
		case units.Volt:
			rating, limit, format, key = st.SourceRating.Volts, st.MaxSourceVolts, fmtV, "voltage"
		case units.Ampere:
			rating, limit, format, key = st.SourceRating.Amps, st.MaxSourceAmps, fmtA, "current"
		default:
			// The station's caps are on voltage and current levels; a stimulus
			// of another quantity has no cap here and is refused, not waved
			// through.
			if !said[x.Step+"/dim"] {
				said[x.Step+"/dim"] = true
				errs = append(errs, fmt.Sprintf("%s: step %q programs a %s on the %s: this release caps voltage and current levels only, so it cannot run it", x.Where, x.Step, x.Dim, x.Role))
			}
			continue
		}
		if rating > 0 && !withinCap(x.Level, rating) && !said[x.Step+"/rating"] {
			said[x.Step+"/rating"] = true
			errs = append(errs, fmt.Sprintf("%s: step %q reaches %s on the %s, outside the source's own rating of ±%s (%s safety.source_rating.%s): this source cannot make it",
				x.Where, x.Step, format(x.Level), x.Role, format(rating), st.File.Name, key))
			continue
		}
		if !withinCap(x.Level, limit) && !said[x.Step+"/cap"] {
			said[x.Step+"/cap"] = true
			errs = append(errs, fmt.Sprintf("%s: step %q reaches %s on the %s, above the station cap of %s (%s safety.max_source_%s)",
				x.Where, x.Step, format(x.Level), x.Role, format(limit), st.File.Name, key))
		}
	}
	// Every temperature a step sets, against the station's temperature caps.
	for i, d := range seq.Steps {
		if i > 0 && seq.Steps[i-1].Name == d.Name {
			continue // the same step on another channel
		}
		ts, ok := d.Step.(Thermostat)
		if !ok {
			continue
		}
		for _, p := range ts.SetPoints() {
			if !st.TemperatureAllowed(p.Celsius) {
				errs = append(errs, fmt.Sprintf("%s: step %q sets the %s to %s, outside the station's temperature caps of %s (%s safety.min_temperature, max_temperature)",
					p.Where, d.Name, p.Role, fmtC(p.Celsius), st.temperatureCapsText(), st.File.Name))
			}
		}
	}
	for _, r := range seq.Requires {
		if _, ok := st.Instruments[r]; !ok {
			unbound = append(unbound, fmt.Sprintf("%s: the sequence requires the %q role, which station %s does not bind", seq.File.Name, r, st.ID))
		}
	}
	if r := seq.Switch; r != "" {
		if si, ok := st.Instruments[r]; ok && si.Kind != SwitchRole {
			unbound = append(unbound, fmt.Sprintf("%s: channels.switch names the %q role to route the channels, but station %s binds it as a %s: bind a switch (kind: switch)", seq.SwitchWhere, r, st.ID, si.Kind))
		}
	}
	for i, d := range seq.Steps {
		if i > 0 && seq.Steps[i-1].Name == d.Name {
			continue // the same step on another channel
		}
		for _, ru := range d.Roles {
			if si, ok := st.Instruments[ru.Role]; ok && si.Kind != ru.Kind {
				unbound = append(unbound, fmt.Sprintf("%s: step %q uses the %q role as a %s, but station %s binds it as a %s", d.Where, d.Name, ru.Role, ru.Kind, st.ID, si.Kind))
			}
		}
	}
	// A meter that reads a quantity must have a spec for it, or the budget would
	// leave its error out.
	for _, u := range meterUses(seq) {
		si, ok := st.Instruments[u.role]
		if !ok || si.Kind != VoltMeter || len(si.Specs) == 0 {
			continue
		}
		if d := u.plan.dim(); si.SpecFor(d) == (Accuracy{}) {
			unbound = append(unbound, fmt.Sprintf("%s: step %q reads a %s through the %q role, but station %s gives it no accuracy spec with a range in %s: add one to its accuracy: list",
				u.where, u.step, d, u.role, st.ID, unitOf(d)))
		}
	}
	switch {
	case len(errs) > 0 && len(unbound) > 0:
		return fmt.Errorf("%w: %s; %w: %s", ErrSafety, strings.Join(errs, "; "), ErrUnboundRole, strings.Join(unbound, "; "))
	case len(errs) > 0:
		return fmt.Errorf("%w: %s", ErrSafety, strings.Join(errs, "; "))
	case len(unbound) > 0:
		return fmt.Errorf("%w: %s", ErrUnboundRole, strings.Join(unbound, "; "))
	}
	return nil
}

// withinCap reports whether the source may be programmed to level (V, or A on a
// current source) under a cap of limit, in the same unit, on |level|: the one
// test CheckCaps and the engine share.
func withinCap(level, limit float64) bool {
	return finite(level) && math.Abs(level) <= limit
}

// setLevel programs the source of role after checking the station cap once more:
// a voltage source to level volts under safety.max_source_voltage, a current
// source to level amperes under safety.max_source_current.
func (e *Engine) setLevel(ctx context.Context, role string, level float64) error {
	st := e.cfg.Station
	if cs, ok := e.currents[role]; ok {
		if !withinCap(level, st.MaxSourceAmps) {
			return &stop{verdict: Fault, msg: fmt.Sprintf("%v: refusing to program %s, above the station cap of %s", ErrSafety, fmtA(level), fmtA(st.MaxSourceAmps)), cause: ErrSafety}
		}
		if err := cs.SetCurrent(ctx, level); err != nil {
			return e.blame(role, err.Error(), fmt.Errorf("%s: set current %s: %w", role, fmtA(level), err))
		}
		return nil
	}
	if !withinCap(level, st.MaxSourceVolts) {
		return &stop{verdict: Fault, msg: fmt.Sprintf("%v: refusing to program %s, above the station cap of %s", ErrSafety, fmtV(level), fmtV(st.MaxSourceVolts)), cause: ErrSafety}
	}
	if err := e.sources[role].SetLevel(ctx, level); err != nil {
		return e.blame(role, err.Error(), fmt.Errorf("%s: set level %s: %w", role, fmtV(level), err))
	}
	return nil
}

// zero programs a source's level to zero: 0 A on a current source (cs not nil),
// else 0 V.
func zero(ctx context.Context, src instruments.Source, cs instruments.CurrentSource) error {
	if cs != nil {
		return cs.SetCurrent(ctx, 0)
	}
	return src.SetLevel(ctx, 0)
}

// safeState programs level 0 (0 V, or 0 A on a current source, cs not nil) with
// the output off and disarms the output watchdog, whatever a previous program
// left (after a kill -9 the output may still be on, or the watchdog may have
// switched it off already).
func (e *Engine) safeState(ctx context.Context, src instruments.Source, cs instruments.CurrentSource) error {
	if r, ok := src.(instruments.Resetter); ok {
		if err := r.Reset(ctx); err != nil {
			return err
		}
	}
	if err := src.SetOutput(ctx, false); err != nil {
		return err
	}
	if err := zero(ctx, src, cs); err != nil {
		return err
	}
	if w, ok := src.(instruments.OutputWatchdog); ok {
		if err := w.DisarmWatchdog(ctx); err != nil {
			return fmt.Errorf("disarm output watchdog: %w", err)
		}
	}
	return nil
}

// safeOff switches every source's output off, then programs its level to 0 (0 A
// on a current source) and
// disarms its output watchdog. Each source gets a context of its own, so it works
// after the run's context was cancelled, and the sources are switched in parallel,
// so one that hangs (a link that stopped answering) cannot use up another's time.
// Only the switch-off and the level count: a watchdog that cannot be disarmed runs
// out with the output already off, which is logged, not a fault. The first error,
// in role order, is returned.
func (e *Engine) safeOff(log zerolog.Logger) error {
	var roles []string
	for _, r := range e.roles {
		if _, ok := e.sources[r]; ok {
			roles = append(roles, r)
		}
	}
	errs := make([]error, len(roles))
	off := func(i int, r string) {
		src := e.sources[r]
		ctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
		defer cancel()
		err := src.SetOutput(ctx, false)
		if err2 := zero(ctx, src, e.currents[r]); err == nil {
			err = err2
		}
		if w, ok := src.(instruments.OutputWatchdog); ok && err == nil {
			if werr := w.DisarmWatchdog(ctx); werr != nil {
				log.Error().Err(werr).Str("role", r).Msg("output off, but the output watchdog could not be disarmed")
			}
		}
		if err != nil && len(roles) > 1 {
			err = fmt.Errorf("%s: %w", r, err)
		}
		errs[i] = err
	}
	if len(roles) == 1 {
		off(0, roles[0]) // one source: no other to wait for
	} else {
		var wg sync.WaitGroup
		for i, r := range roles {
			wg.Go(func() { off(i, r) })
		}
		wg.Wait()
	}
	for _, err := range errs {
		if err != nil {
			return err
		}
	}
	return nil
}

// safeTemperature sets every thermal role to the station's safe temperature,
// each with a context of its own (so it works after the run's context was
// cancelled), in role order. The first error is returned; the other chambers are
// still set.
func (e *Engine) safeTemperature(log zerolog.Logger) error {
	var first error
	c := e.cfg.Station.SafeTemperature
	for _, r := range e.roles {
		th, ok := e.thermals[r]
		if !ok {
			continue
		}
		ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
		err := th.SetTemperature(ctx, c)
		cancel()
		if err != nil {
			log.Error().Err(err).Str("role", r).Msg("could not set the safe temperature")
			if first == nil {
				first = fmt.Errorf("%s: set %s: %w", r, fmtC(c), err)
			}
			continue
		}
		log.Debug().Str("role", r).Float64("celsius", c).Msg("safe temperature set")
	}
	return first
}

// handlingNotes reads every thermal role once the safe temperature is set and
// returns a note for each that reads more than the station's handling band
// away from it, or that could not be read: the set point is commanded, not
// reached, and the operator waits before opening the fixture.
func (e *Engine) handlingNotes(log zerolog.Logger) []string {
	var notes []string
	safe, band := e.cfg.Station.SafeTemperature, e.cfg.Station.HandlingBand
	for _, r := range e.roles {
		th, ok := e.thermals[r]
		if !ok {
			continue
		}
		ctx, cancel := context.WithTimeout(context.Background(), 5*time.Second)
		c, err := th.Temperature(ctx)
		cancel()
		switch {
		case err != nil:
			log.Warn().Err(err).Str("role", r).Msg("could not read the chamber after setting the safe temperature")
			notes = append(notes, fmt.Sprintf("%s: temperature not read (%v): wait before opening the fixture", r, err))
		case !finite(c) || math.Abs(c-safe) > band:
			log.Warn().Str("role", r).Float64("celsius", c).Msg("chamber beyond the handling band of the safe temperature")
			notes = append(notes, fmt.Sprintf("%s at %.1f °C: wait before opening the fixture (safe temperature %s, handling band ±%s)", r, c, fmtC(safe), fmtC(band)))
		}
	}
	return notes
}
