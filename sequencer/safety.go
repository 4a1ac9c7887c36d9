package sequencer

// The station's safety caps, checked at load and before every write to the source,
// and the safe state every exit path leaves the source in.

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strings"
	"time"

	"trimline/instruments"
)

// ErrSafety is wrapped by every refusal to program the source outside the
// station's caps.
var ErrSafety = errors.New("safety cap")

// ErrUnboundRole is wrapped when a sequence requires an instrument role the
// station does not bind: the files do not fit together, but nothing was unsafe.
var ErrUnboundRole = errors.New("unbound role")

// CheckCaps reports whether the sequence stays inside the station's safety caps
// (an error wrapping ErrSafety) and whether the station binds every role the
// sequence requires (an error wrapping ErrUnboundRole); both when both fail. It
// is run at load (trimline check) and again when an Engine opens.
func CheckCaps(st *Station, seq *Sequence) error {
	var errs, unbound []string
	for _, sw := range []struct {
		name string
		p    SweepPlan
	}{{"pre_trim", seq.PreTrim}, {"verify", seq.Verify}} {
		// Every level the sweep will program, as the engine computes them, through
		// the engine's own test: the two cannot disagree at the edge of the cap.
		for _, v := range sw.p.Levels() {
			if r := st.SourceRating.Volts; r > 0 && !withinCap(v, r) {
				errs = append(errs, fmt.Sprintf("%s: %s sweep reaches %s, outside the source's own rating of ±%s (%s safety.source_rating.voltage): this source cannot make it",
					sw.p.Where, sw.name, fmtV(v), fmtV(r), st.File.Name))
				break
			}
			if !withinCap(v, st.MaxSourceVolts) {
				errs = append(errs, fmt.Sprintf("%s: %s sweep reaches %s, above the station cap of %s (%s safety.max_source_voltage)",
					sw.p.Where, sw.name, fmtV(v), fmtV(st.MaxSourceVolts), st.File.Name))
				break
			}
		}
	}
	for _, r := range seq.Requires {
		if _, ok := st.Instruments[r]; !ok {
			unbound = append(unbound, fmt.Sprintf("%s: the sequence requires the %q role, which station %s does not bind", seq.File.Name, r, st.ID))
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

// withinCap reports whether the source may be programmed to volts under a cap of
// capVolts on |level|: the one test CheckCaps and the engine share.
func withinCap(volts, capVolts float64) bool {
	return finite(volts) && math.Abs(volts) <= capVolts
}

// setLevel programs the source after checking the station cap once more.
func (e *Engine) setLevel(ctx context.Context, volts float64) error {
	if !withinCap(volts, e.cfg.Station.MaxSourceVolts) {
		return &stop{Fault, fmt.Sprintf("%v: refusing to program %s, above the station cap of %s", ErrSafety, fmtV(volts), fmtV(e.cfg.Station.MaxSourceVolts))}
	}
	if err := e.source.SetLevel(ctx, volts); err != nil {
		return fmt.Errorf("source: set level %s: %w", fmtV(volts), err)
	}
	return nil
}

// safeState programs level 0 with the output off and disarms the output watchdog,
// whatever a previous program left (after a kill -9 the output may still be on, or
// the watchdog may have switched it off already).
func (e *Engine) safeState(ctx context.Context) error {
	if r, ok := e.source.(instruments.Resetter); ok {
		if err := r.Reset(ctx); err != nil {
			return err
		}
	}
	if err := e.source.SetOutput(ctx, false); err != nil {
		return err
	}
	if err := e.source.SetLevel(ctx, 0); err != nil {
		return err
	}
	if e.watchdog != nil {
		if err := e.watchdog.DisarmWatchdog(ctx); err != nil {
			return fmt.Errorf("disarm output watchdog: %w", err)
		}
	}
	return nil
}

// safeOff switches the output off with a context of its own, so it works after the
// run's context was cancelled, then disarms the output watchdog. Only the switch-off
// and the level count: a watchdog that cannot be disarmed runs out with the output
// already off, which is logged, not a fault.
func (e *Engine) safeOff() error {
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
	defer cancel()
	err := e.source.SetOutput(ctx, false)
	if err2 := e.source.SetLevel(ctx, 0); err == nil {
		err = err2
	}
	if e.watchdog != nil && err == nil {
		if werr := e.watchdog.DisarmWatchdog(ctx); werr != nil {
			e.log.Error().Err(werr).Msg("output off, but the output watchdog could not be disarmed")
		}
	}
	return err
}
