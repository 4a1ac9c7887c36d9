package sequencer

// The station's step deadline against the steps' own durations.

import (
	"errors"
	"fmt"
	"strings"
	"time"
)

// ErrStepTiming is wrapped when a step of the sequence cannot finish one engine
// step within the station's step_deadline: every unit would fault there. It is a
// misfit of the two files, not a safety matter.
var ErrStepTiming = errors.New("step longer than the station's step deadline")

// Timed is a step whose duration is known at load: Least is the shortest time one
// of its engine steps can take (a sweep point: its settle plus its readings at the
// meter's integration time), for the check against step_deadline; Budget is the
// whole step's estimated time and meter readings, for the sequence's bounds.
type Timed interface {
	Least() time.Duration
	Budget() (d time.Duration, readings int)
}

// Budget is the sweep's estimated time and its readings.
func (s *sweepStep) Budget() (time.Duration, int) {
	return sweepTime(s.Plan), s.Plan.Points * s.Plan.Readings
}

// Least is one sweep point's shortest time: the settle and the readings at the
// sweep's integration time on the slower, 50 Hz, line.
func (s *sweepStep) Least() time.Duration {
	return s.Plan.pointTime()
}

// CheckTiming reports, in an error wrapping ErrStepTiming, every step whose engine
// step takes at least the station's step_deadline, so that the files are refused
// at load (trimline check, and when an Engine opens) instead of faulting every
// unit. With no step deadline it reports nothing.
func CheckTiming(st *Station, seq *Sequence) error {
	d := st.StepDeadline
	if d <= 0 {
		return nil
	}
	var errs []string
	for _, s := range seq.Steps {
		if t, ok := s.Step.(Timed); ok && t.Least() >= d {
			errs = append(errs, fmt.Sprintf("%s: step %q needs at least %s for one point, which the station's step_deadline of %s (%s) cuts short: shorten its settle or readings, lower nplc, or raise step_deadline",
				s.Where, s.Name, t.Least().Round(time.Millisecond), d, st.File.Name))
		}
	}
	if len(errs) > 0 {
		return fmt.Errorf("%w: %s", ErrStepTiming, strings.Join(errs, "; "))
	}
	return nil
}

// Outline lists the sequence's steps as a progress screen shows them (one entry
// per step and channel, in run order, as Sequence.Steps) and the run's expected
// duration: the sum of the steps' timing estimates (Timed.Budget: the settles and
// the readings at the meter's integration time on a 50 Hz line; for a re-trim
// every pass, an upper bound; for a soak its dwell, the least it takes once the
// chamber is in its band, since its timeout, the Budget, is hours). A step
// without an estimate (a fit, a trim, a command) counts 0; the instruments'
// exchanges are not counted, so a bench over a wire takes a little longer.
func (s *Sequence) Outline() (steps []StepInfo, expected time.Duration) {
	for _, d := range s.Steps {
		in := StepInfo{Name: d.Name, Kind: d.Kind, Channel: d.Channel}
		if t, ok := d.Step.(Timed); ok {
			in.Expected, _ = t.Budget()
		}
		if s, ok := d.Step.(*soakStep); ok {
			in.Expected = s.dwell
		}
		if p, ok := d.Step.(pointed); ok {
			in.Points = p.points()
		}
		expected += in.Expected
		steps = append(steps, in)
	}
	return steps, expected
}

// pointed is a step that reports reading points as it runs (EventPoint): points
// is how many a run of it takes at most.
type pointed interface{ points() int }

var (
	_ pointed = (*sweepStep)(nil)
	_ pointed = (*measureStep)(nil)
	_ pointed = (*zeroStep)(nil)
	_ pointed = (*retrimStep)(nil)
)

func (s *sweepStep) points() int   { return s.Plan.Points }
func (s *measureStep) points() int { return 1 }
func (s *zeroStep) points() int    { return 2 } // shorted, then at a programmed 0
func (s *retrimStep) points() int  { return s.maxPasses * len(s.plan.List) }
