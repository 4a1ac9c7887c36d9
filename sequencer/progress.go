package sequencer

import "time"

// EventKind says what a progress Event reports.
type EventKind string

// The progress events an Engine emits while it runs a unit, in this order: one
// EventUnitStart, then per step an EventStepStart, any number of EventPoint (one
// per reading point of a sweep, measure, zero check or re-trim pass) and an
// EventStepEnd, and last one EventUnitEnd. A skipped step and a step not reached
// get their start and end too. When a station fault or a stop ends the run, the
// step it happened in ends with Status StepStopped, the later steps get no
// events (the record does not list them either), and EventUnitEnd follows. A
// run that stops before its first step (a calibration expired) has no step
// events. Only a run on the bench emits: a replay and the on-paper prediction
// never do.
const (
	EventUnitStart EventKind = "unit_start"
	EventStepStart EventKind = "step_start"
	EventPoint     EventKind = "point"
	EventStepEnd   EventKind = "step_end"
	EventUnitEnd   EventKind = "unit_end"
)

// Event is one piece of a run's progress, for a screen to follow the unit
// (Config.Progress). It carries copies, never the record being built.
type Event struct {
	Kind   EventKind
	At     time.Time // the engine's clock (a simulated bench's own time on sim://)
	Serial string
	RunID  string

	// EventUnitStart: the steps the sequence will run, and how long the run is
	// expected to take on this station (0 when not known).
	Steps    []StepInfo
	Expected time.Duration

	// EventStepStart, EventPoint, EventStepEnd: the step (index into Steps).
	Step     int
	Name     string
	StepKind string
	Channel  string

	// EventPoint: point Point (1-based) of Points of the step, the level
	// programmed (Stimulus, in StimulusUnit), the mean response read (Response,
	// in ResponseUnit) and its error against the ideal transfer (Error, in
	// ResponseUnit).
	Point, Points              int
	Stimulus, Response, Error  float64
	StimulusUnit, ResponseUnit string

	// EventStepEnd: how the step ended.
	Status string // StepDone, StepSkipped, StepNotReached or StepStopped

	// EventUnitEnd: the verdict, final: emitted once the source is off and the
	// run's record complete (the record is the caller's to read once Run
	// returns).
	Verdict Verdict
}

// StepStopped is the Status of the EventStepEnd of the step a station fault or
// a stop ended the run in. Records do not list that step.
const StepStopped = "stopped"

// StepInfo is one step of a sequence as a progress screen lists it.
type StepInfo struct {
	Name, Kind, Channel string
	Points              int           // reading points, 0 for a step that reads none
	Expected            time.Duration // expected duration on this station, 0 when not known
}

// emit hands ev to the Config's Progress hook, if any.
func (e *Engine) emit(ev Event) {
	if e.cfg.Progress == nil {
		return
	}
	ev.At = e.clock.Now().UTC()
	e.cfg.Progress(ev)
}

// progressed reports whether the unit's run emits progress events: on the
// bench, with a hook.
func (u *Unit) progressed() bool {
	return u.mode == live && u.e != nil && u.e.cfg.Progress != nil
}

// emitStep reports that the running step (index i of the sequence's steps)
// starts (kind EventStepStart) or ends (EventStepEnd, with status).
func (u *Unit) emitStep(kind EventKind, i int, status string) {
	if !u.progressed() {
		return
	}
	if kind == EventStepStart {
		u.e.points = 0
	}
	d := u.step
	u.e.emit(Event{Kind: kind, Serial: u.Serial, RunID: u.Rec.RunID, Step: i, Name: d.Name, StepKind: d.Kind, Channel: d.Channel, Status: status})
}

// emitPoint reports one reading point of the running step: the level x
// programmed (in the stimulus's unit), the mean of its readings and ideal, the
// response of the ideal transfer there (both in the response's unit).
func (u *Unit) emitPoint(x, mean, ideal float64) {
	if !u.progressed() {
		return
	}
	u.e.points++
	d := u.step
	u.e.emit(Event{Kind: EventPoint, Serial: u.Serial, RunID: u.Rec.RunID, Step: u.e.stepAt, Name: d.Name, StepKind: d.Kind, Channel: d.Channel,
		Point: u.e.points, Points: u.e.outline[u.e.stepAt].Points, Stimulus: x, Response: mean, Error: mean - ideal,
		StimulusUnit: unitOf(u.seq.stimDim()), ResponseUnit: unitOf(u.seq.ResponseDim)})
}
