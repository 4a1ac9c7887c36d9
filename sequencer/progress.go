package sequencer

import "time"

// EventKind says what a progress Event reports.
type EventKind string

// The progress events an Engine emits while it runs a unit, in this order: one
// EventUnitStart, then per step an EventStepStart, any number of EventPoint (one
// per reading point of a sweep, measure, zero check or re-trim pass) and an
// EventStepEnd, and last one EventUnitEnd.
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
	Status string // StepDone, StepSkipped or StepNotReached

	// EventUnitEnd: the verdict (the record is the caller's to read once Run
	// returns).
	Verdict Verdict
}

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
