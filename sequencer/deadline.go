package sequencer

// Step deadlines: the station file's bound on one engine step.

import (
	"context"
	"errors"
	"fmt"
)

// step runs one engine step under the station's step deadline, if any. A step that
// overruns it is a station fault naming the deadline. When the source has an output
// watchdog, the step first arms it again (every sweep point is a step), so the
// output stays on only while the engine keeps stepping.
func (e *Engine) step(ctx context.Context, f func(ctx context.Context) error) error {
	if len(e.watchdogs) > 0 {
		g := f
		f = func(ctx context.Context) error {
			for i, w := range e.watchdogs {
				if err := w.ArmWatchdog(ctx); err != nil {
					return e.blame(e.watchdogRoles[i], err.Error(), fmt.Errorf("source: arm output watchdog: %w", err))
				}
			}
			return g(ctx)
		}
	}
	d := e.cfg.Station.StepDeadline
	if d <= 0 {
		return f(ctx)
	}
	sctx, cancel := context.WithTimeoutCause(ctx, d, errStepDeadline)
	defer cancel()
	err := f(sctx)
	if err != nil && ctx.Err() == nil && context.Cause(sctx) == errStepDeadline {
		s := &stop{verdict: Fault, msg: fmt.Sprintf("step deadline of %s exceeded (station file step_deadline): %v", d, err)}
		if fd, ok := DetailOf(err); ok {
			return e.blame(fd.Role, fd.Said, s)
		}
		return s
	}
	return err
}

var errStepDeadline = errors.New("step deadline exceeded")
