// Package sequencer is trimline's engine and the domain it speaks: station and
// sequence files, sweeps, fits, trim codes, verdicts and the run record.
//
// Open opens the station's instruments by role once per batch, checks them and puts
// the source in a safe state. Then, for each serial number, Run identifies the unit,
// sweeps the input range before trim, fits a straight line, computes and writes the
// trim codes, reads them back, stores them, sweeps again to verify, judges every
// limit and decides the verdict. Every instrument's error queue is read after each
// sweep point and before the verdict; an entry is a station fault. Every exit path
// leaves the source output off, the channel switch (if any) released and every
// temperature chamber at the station's safe temperature. A unit
// with several channels runs its per-channel steps once per channel, the switch
// routed to each in turn.
//
// The engine imports only the instruments contract and the limits judge; it never
// imports a concrete driver, the PDF writer or the ledger.
package sequencer

import (
	"context"
	"crypto/rand"
	"encoding/hex"
	"errors"
	"fmt"
	"runtime/debug"
	"slices"
	"strings"
	"time"

	"github.com/rs/zerolog"

	"trimline/instruments"
	"trimline/instruments/units"
)

// Config is what an Engine needs besides the instruments.
type Config struct {
	Station  *Station
	Sequence *Sequence
	Operator string
	Software string         // version string recorded in every run
	Log      zerolog.Logger // zero value logs nothing
	// Conditions are recorded in every run (e.g. an ambient temperature the
	// operator entered).
	Conditions Conditions
	// Engineering runs use files that were never released; every record says so.
	Engineering bool
	// Lot is recorded in every run (Record.Lot); "" = none. CheckLot says
	// which lot ids are accepted.
	Lot string
	// NewID returns a run id; nil uses a time-stamped random id.
	NewID func(now time.Time) string
	// Progress, when set, is called with every progress event of a run, on the
	// engine's goroutine and in order. It must return quickly (copy the event
	// and hand it on: the run waits for it) and must not panic (a panic during
	// the run faults the unit, as any panic does); it never changes what the
	// run records.
	Progress func(Event)
}

// Engine runs units on one opened bench. It is not safe for concurrent use: one
// fixture, one unit at a time.
type Engine struct {
	cfg     Config
	all     map[string]instruments.Instrument
	roles   []string // opened roles, sources first
	sources map[string]instruments.Source
	// currents are the sources bound as current sources (also in sources),
	// by role: programmed in amperes, their compliance a voltage.
	currents map[string]instruments.CurrentSource
	meters   map[string]instruments.Meter
	ports    map[string]instruments.TrimPort
	// switches are the switches by role; routed is the channel the sequence's
	// switch is routed to ("" = released, or not known).
	switches map[string]instruments.Switch
	routed   string
	// thermals are the chambers by role: set to the station's safe temperature
	// on every exit path.
	thermals map[string]instruments.Thermal
	meterAt  map[string]MeterPlan // how each meter is configured now
	clock    instruments.Clock
	// benchClock is true when clock is an instrument's own (a simulated
	// bench's), not the wall clock.
	benchClock bool
	refs       []InstrumentRef
	closed     bool

	// watchdogs are the sources' output watchdogs (those that have one): armed
	// at every step, disarmed once the output is off.
	watchdogs     []instruments.OutputWatchdog
	watchdogRoles []string    // the role of each of watchdogs
	queues        []roleQueue // instruments with an error queue, in role order

	// The running unit's progress: the sequence's outline (Sequence.Outline),
	// the step running (index into it) and the points it has reported.
	outline  []StepInfo
	expected time.Duration
	stepAt   int
	points   int
}

// Open checks the station against the sequence (caps, roles, predicted TUR), opens
// every required instrument, checks calibration due dates and pinned identities,
// puts the source in a safe state (level 0, output off), sets its compliance to
// the station's current cap (a current source's compliance voltage to the
// voltage cap) and configures the meter. One Engine serves a whole
// batch: Run it once per unit, then Close it. On error nothing stays open.
func Open(ctx context.Context, cfg Config) (*Engine, error) {
	st, seq := cfg.Station, cfg.Sequence
	if err := CheckCaps(st, seq); err != nil {
		return nil, err
	}
	if err := CheckTiming(st, seq); err != nil {
		return nil, err
	}
	// The TURs a run can reach at its ambient: specs widened outside their band.
	checks, err := CheckTUR(st.atAmbient(cfg.Conditions), seq)
	if err != nil {
		return nil, err
	}
	for _, c := range checks {
		if c.Low && !c.OneSided {
			cfg.Log.Warn().Str("limit", c.Limit).Float64("tur", c.TUR).Float64("min_tur", c.Min).Msg("the station's instruments cannot reach the limit file's minimum TUR for this limit")
		}
	}
	all, err := instruments.OpenAll(ctx, st.Specs(seq.Requires))
	if err != nil {
		if oe := (*instruments.OpenError)(nil); errors.As(err, &oe) {
			err = blame(st, oe.Role, oe.Err.Error(), err)
		}
		return nil, err
	}
	e := &Engine{cfg: cfg, all: all, clock: instruments.RealClock{}, sources: map[string]instruments.Source{}, currents: map[string]instruments.CurrentSource{},
		meters: map[string]instruments.Meter{}, ports: map[string]instruments.TrimPort{}, switches: map[string]instruments.Switch{}, thermals: map[string]instruments.Thermal{}, meterAt: map[string]MeterPlan{}}
	e.outline, e.expected = seq.Outline()
	fail := func(err error) (*Engine, error) {
		e.Close()
		return nil, err
	}
	for _, r := range st.Roles() {
		if _, opened := all[r]; opened {
			e.roles = append(e.roles, r)
		}
	}
	for _, r := range e.roles {
		si, in := st.Instruments[r], all[r]
		switch si.Kind {
		case VoltageSource:
			src, ok := in.(instruments.Source)
			if !ok {
				return fail(fmt.Errorf("%s at %s is not a voltage source", r, si.Address))
			}
			e.sources[r] = src
			if w, ok := src.(instruments.OutputWatchdog); ok {
				e.watchdogs, e.watchdogRoles = append(e.watchdogs, w), append(e.watchdogRoles, r)
			}
		case CurrentSource:
			src, ok := in.(instruments.Source)
			cs, isCurrent := in.(instruments.CurrentSource)
			if !ok || !isCurrent {
				return fail(fmt.Errorf("%s at %s is not a current source (it cannot be programmed in amperes)", r, si.Address))
			}
			e.sources[r], e.currents[r] = src, cs
			if w, ok := src.(instruments.OutputWatchdog); ok {
				e.watchdogs, e.watchdogRoles = append(e.watchdogs, w), append(e.watchdogRoles, r)
			}
		case VoltMeter:
			m, ok := in.(instruments.Meter)
			if !ok {
				return fail(fmt.Errorf("%s at %s is not a voltmeter", r, si.Address))
			}
			e.meters[r] = m
		case DUTPort:
			p, ok := in.(instruments.TrimPort)
			if !ok {
				return fail(fmt.Errorf("%s at %s is not a trim port", r, si.Address))
			}
			e.ports[r] = p
		case SwitchRole:
			sw, ok := in.(instruments.Switch)
			if !ok {
				return fail(fmt.Errorf("%s at %s is not a switch", r, si.Address))
			}
			e.switches[r] = sw
		case ThermalRole:
			th, ok := in.(instruments.Thermal)
			if !ok {
				return fail(fmt.Errorf("%s at %s is not a temperature chamber (thermal)", r, si.Address))
			}
			e.thermals[r] = th
		}
		if q, ok := in.(instruments.ErrorQueue); ok {
			e.queues = append(e.queues, roleQueue{r, q})
		}
	}
	for _, d := range seq.Steps {
		for _, ru := range d.Roles {
			if k := st.Instruments[ru.Role].Kind; k != ru.Kind {
				return fail(fmt.Errorf("step %q (%s) uses the %s role as a %s, but station %s binds it as a %s", d.Name, d.Where, ru.Role, ru.Kind, st.ID, k))
			}
		}
	}
	if r := seq.Switch; r != "" {
		if k := st.Instruments[r].Kind; k != SwitchRole {
			return fail(fmt.Errorf("%s: channels.switch names the %s role, but station %s binds it as a %s: bind a switch (kind: switch) to route the channels", seq.SwitchWhere, r, st.ID, k))
		}
	}
	for _, r := range seq.Requires {
		if cs, ok := all[r].(instruments.ClockSource); ok {
			e.clock, e.benchClock = cs.Clock(), true
			break
		}
	}
	now := e.clock.Now()
	for _, r := range seq.Requires {
		si := st.Instruments[r]
		ref := instrumentRef(r, si, e.cfg.Conditions)
		ref.Identity = instruments.Identity{Maker: "0", Model: "0", Serial: "0", Firmware: "0"}
		if cal, _ := si.Calibration(now); cal == CalExpired {
			return fail(e.blame(r, "calibration due "+ref.CalDue, &expiredError{fmt.Sprintf("%s %s: calibration expired on %s; recalibrate it or fix cal_due in %s", r, si.Asset, ref.CalDue, st.File.Name)}))
		}
		// A DUT port's identity belongs to the unit in the fixture, read per run.
		if id, ok := all[r].(instruments.Identifier); ok && si.Kind != DUTPort {
			got, err := id.Identify(ctx)
			if err != nil {
				return fail(e.blame(r, err.Error(), fmt.Errorf("%s: identify: %w", r, err)))
			}
			ref.Identity = got
			if si.Model != "" && got.Model != si.Model || si.Serial != "" && got.Serial != si.Serial {
				return fail(e.blame(r, "identifies as "+got.String(), fmt.Errorf("%s %s: instrument identifies as model %q serial %q, station file pins model %q serial %q: wrong instrument on the bench",
					r, si.Asset, got.Model, got.Serial, si.Model, si.Serial)))
			}
		}
		e.refs = append(e.refs, ref)
	}
	if il := st.Interlock; il != nil {
		if _, ok := all[il.Role].(instruments.Querier); !ok {
			return fail(fmt.Errorf("interlock: the %s at %s cannot be queried", il.Role, st.Instruments[il.Role].Address))
		}
	}
	for _, r := range e.roles {
		src, ok := e.sources[r]
		if !ok {
			continue
		}
		cs := e.currents[r]
		if err := e.safeState(ctx, src, cs); err != nil {
			return fail(e.blame(r, err.Error(), fmt.Errorf("put %s in a safe state: %w", r, err)))
		}
		// The compliance, before any output is switched on: a voltage source
		// limits its current to the current cap, a current source its voltage
		// to the voltage cap.
		if cs != nil {
			if err := cs.SetVoltageLimit(ctx, st.MaxSourceVolts); err != nil {
				return fail(e.blame(r, err.Error(), fmt.Errorf("%s: set compliance voltage: %w", r, err)))
			}
			continue
		}
		if err := src.SetCompliance(ctx, st.MaxSourceAmps); err != nil {
			return fail(e.blame(r, err.Error(), fmt.Errorf("%s: set compliance: %w", r, err)))
		}
	}
	// A meter asked to read a current must be able to: refused here, before any
	// output is switched on. Each meter starts as its first step reads.
	uses := meterUses(seq)
	for _, r := range e.roles {
		m, ok := e.meters[r]
		if !ok {
			continue
		}
		first := seq.Meter
		for _, u := range uses {
			if u.role != r {
				continue
			}
			if _, ok := m.(instruments.FunctionSetter); !ok && u.plan.Function == instruments.FuncCurrent {
				return fail(fmt.Errorf("step %q (%s) reads a current through the %s at %s, which measures DC voltage only (it cannot be set to a current function)",
					u.step, u.where, r, st.Instruments[r].Address))
			}
		}
		for _, u := range uses {
			if u.role == r {
				first = u.plan
				break
			}
		}
		if err := e.configureMeter(ctx, r, first); err != nil {
			return fail(err)
		}
	}
	if err := e.release(cfg.Log); err != nil {
		return fail(fmt.Errorf("put the switch in a safe state: %w", err))
	}
	return e, nil
}

// meterUse is one step's reading through a meter role.
type meterUse struct {
	role, step, where string
	plan              MeterPlan
}

// reader is a step that takes readings: its plan says through which meter (or
// the unit itself), in which function, range and integration time. Every kind
// that reads implements it, so the meter checks at load and at Open see it.
type reader interface {
	readingPlan() SweepPlan
}

var (
	_ reader = (*sweepStep)(nil)
	_ reader = (*measureStep)(nil)
	_ reader = (*retrimStep)(nil)
)

func (s *sweepStep) readingPlan() SweepPlan   { return s.Plan }
func (s *measureStep) readingPlan() SweepPlan { return s.plan }
func (s *retrimStep) readingPlan() SweepPlan  { return s.plan }

// meterUses lists the steps' readings through meters, in step order.
func meterUses(seq *Sequence) []meterUse {
	var out []meterUse
	for _, d := range seq.Steps {
		r, ok := d.Step.(reader)
		if !ok {
			continue
		}
		if p := r.readingPlan(); p.Response == nil && p.Meter != "" {
			out = append(out, meterUse{role: p.Meter, step: d.Name, where: d.Where, plan: p.MeterSet})
		}
	}
	return out
}

// configureMeter sets the meter's function, range and integration time unless
// it is so set already. A meter without instruments.FunctionSetter measures DC
// voltage only: asked for a current it is a station fault.
func (e *Engine) configureMeter(ctx context.Context, role string, p MeterPlan) error {
	if at, ok := e.meterAt[role]; ok && at == p {
		return nil
	}
	if fs, ok := e.meters[role].(instruments.FunctionSetter); ok && p.Function != "" {
		if err := fs.SetFunction(ctx, p.Function); err != nil {
			return e.blame(role, err.Error(), fmt.Errorf("%s: set function %s: %w", role, p.Function, err))
		}
	} else if p.Function == instruments.FuncCurrent {
		return &stop{verdict: Fault, msg: fmt.Sprintf("%s: asked to read a current, but it measures DC voltage only (no function setting)", role)}
	}
	if mc, ok := e.meters[role].(instruments.MeterConfigurer); ok {
		if err := mc.Configure(ctx, p.Range, p.NPLC); err != nil {
			return e.blame(role, err.Error(), fmt.Errorf("%s: configure: %w", role, err))
		}
	}
	e.meterAt[role] = p
	return nil
}

// Instrument returns the opened instrument for role, or nil.
func (e *Engine) Instrument(role string) instruments.Instrument { return e.all[role] }

// Close switches the source output off, releases the channel switch, sets every
// thermal role to the station's safe temperature and closes every instrument. Safe to call twice.
func (e *Engine) Close() error {
	if e.closed {
		return nil
	}
	e.closed = true
	first := e.safeOff(e.cfg.Log)
	if err := e.release(e.cfg.Log); err != nil && first == nil {
		first = err
	}
	if err := e.safeTemperature(e.cfg.Log); err != nil && first == nil {
		first = err
	}
	for _, r := range e.roles {
		if in, ok := e.all[r]; ok {
			if err := in.Close(); err != nil && first == nil {
				first = err
			}
		}
	}
	return first
}

// stop ends a run early: it carries the verdict and the message.
type stop struct {
	verdict Verdict
	msg     string
	cause   error // a sentinel the stop is an instance of (ErrSafety), or nil
}

func (s *stop) Error() string { return s.msg }
func (s *stop) Unwrap() error { return s.cause }

// Run trims one serial number and returns its record. Run never returns a nil
// record: a station fault, a cancelled context or a panic are recorded in it with
// verdict FAULT or ABORTED. The source output is off, the channel switch
// released and every thermal role set to the safe temperature when Run returns.
func (e *Engine) Run(ctx context.Context, serial string) (rec *Record) {
	return e.RunWith(ctx, serial, RunOptions{})
}

// RunOptions change one run from what the Engine's Config says: a console
// signs operators in and out over a shift on one opened bench.
type RunOptions struct {
	Operator string // "" = Config.Operator
	// Lot is the production lot this run records (Record.Lot), "" =
	// Config.Lot: a console's operator changes lots over a shift on one
	// opened bench. CheckLot says which lot ids are accepted.
	Lot      string
	Progress func(Event) // nil = Config.Progress
}

// RunWith is Run with the operator, lot and progress hook of this one run. The
// hook (o.Progress, else Config.Progress) gets the run's events as progress.go
// lists them, the last, EventUnitEnd, once the source is off and the record
// complete.
func (e *Engine) RunWith(ctx context.Context, serial string, o RunOptions) *Record {
	if o.Progress != nil {
		saved := e.cfg.Progress
		e.cfg.Progress = o.Progress
		defer func() { e.cfg.Progress = saved }()
	}
	operator := e.cfg.Operator
	if o.Operator != "" {
		operator = o.Operator
	}
	lot := e.cfg.Lot
	if o.Lot != "" {
		lot = o.Lot
	}
	rec := e.runUnit(ctx, serial, operator, lot)
	e.emit(Event{Kind: EventUnitEnd, Serial: rec.Serial, RunID: rec.RunID, Verdict: rec.Verdict})
	return rec
}

// runUnit is RunWith without its hook's last event: the deferred safe-off has
// run when it returns.
func (e *Engine) runUnit(ctx context.Context, serial, operator, lot string) (rec *Record) {
	st, seq := e.cfg.Station, e.cfg.Sequence
	now := e.clock.Now().UTC()
	rec = &Record{
		Schema: RecordSchema, Metrology: CurrentMetrology, Serial: serial, Product: seq.Product, Revision: seq.Revision,
		Station: st.ID, Operator: operator, Software: e.cfg.Software, Started: now,
		Files:       []FileRef{st.File, seq.File, seq.LimitsFile},
		Instruments: append([]InstrumentRef(nil), e.refs...),
		IdealGain:   seq.IdealGain, IdealOffset: seq.IdealOffset, FullScale: seq.FullScale, ResponseUnit: seq.recordResponseUnit(), StimulusUnit: seq.recordStimulusUnit(),
		Conditions: e.cfg.Conditions, Coverage: coverage(seq), Engineering: e.cfg.Engineering, Lot: lot, Site: st.Site,
		Simulated: simulation(e.refs, e.benchClock),
	}
	if e.cfg.NewID != nil {
		rec.RunID = e.cfg.NewID(now)
	} else {
		rec.RunID = newID(now)
	}
	log := e.cfg.Log.With().Str("serial", serial).Str("run", rec.RunID).Logger()
	u := newUnit(e.cfg, rec, live)
	u.e, u.log = e, log
	defer func() {
		if p := recover(); p != nil {
			log.Error().Str("stack", string(debug.Stack())).Msgf("panic: %v", p)
			rec.Verdict, rec.Fault = Fault, fmt.Sprintf("internal error: %v", p)
		}
		if err := e.safeOff(log); err == nil {
			log.Debug().Msg("source output off, level 0")
		} else {
			log.Error().Err(err).Msg("could not switch the source output off")
			if rec.Verdict != Aborted {
				rec.Verdict = Fault
				if r := e.onlySource(); r != "" && rec.FaultDetail == nil {
					d, _ := DetailOf(blame(st, r, err.Error(), err))
					rec.FaultDetail = &d
				}
			}
			rec.Fault = strings.TrimPrefix(rec.Fault+"; source output off failed: "+err.Error(), "; ")
		}
		// The switch opens every path once the outputs are off, whatever happened.
		if err := e.release(log); err != nil {
			if rec.Verdict != Aborted {
				rec.Verdict = Fault
			}
			rec.Fault = strings.TrimPrefix(rec.Fault+"; switch release failed: "+err.Error(), "; ")
		}
		// Every chamber goes back to the safe temperature, whatever happened.
		if err := e.safeTemperature(log); err != nil {
			if rec.Verdict != Aborted {
				rec.Verdict = Fault
			}
			rec.Fault = strings.TrimPrefix(rec.Fault+"; return to the safe temperature failed: "+err.Error(), "; ")
		}
		// At the normal end of a run the chamber is read: the safe temperature is
		// a set point, and a unit in a chamber still hot or cold is not handled.
		if rec.Verdict != Fault && rec.Verdict != Aborted {
			rec.Notes = append(rec.Notes, e.handlingNotes(log)...)
		}
		rec.Finished = e.clock.Now().UTC()
	}()
	e.emit(Event{Kind: EventUnitStart, Serial: serial, RunID: rec.RunID, Steps: slices.Clone(e.outline), Expected: e.expected})
	err := e.run(ctx, u)
	var s *stop
	switch {
	case err == nil:
	case errors.As(err, &s):
		rec.Verdict = s.verdict
		if s.verdict == Fail {
			rec.Reasons = append(rec.Reasons, s.msg)
		} else {
			rec.Fault = s.msg
		}
	case ctx.Err() != nil:
		rec.Verdict, rec.Fault = Aborted, fmt.Sprintf("aborted: %v", context.Cause(ctx))
	default:
		rec.Verdict, rec.Fault = Fault, err.Error()
	}
	if rec.Verdict == Fault {
		if d, ok := DetailOf(err); ok {
			rec.FaultDetail = &d
		}
	}
	if rec.Verdict == Fault || rec.Verdict == Aborted {
		log.Warn().Str("verdict", string(rec.Verdict)).Msg(rec.Fault)
	}
	return rec
}

func (e *Engine) run(ctx context.Context, u *Unit) error {
	seq, rec := e.cfg.Sequence, u.Rec
	// A long batch can outlive a calibration: check every unit, not just at open.
	for _, r := range seq.Requires {
		si := e.cfg.Station.Instruments[r]
		if cal, _ := si.Calibration(rec.Started); cal == CalExpired {
			return e.blame(r, "calibration due "+si.CalDue.Format("2006-01-02"), &stop{verdict: Fault, cause: ErrCalibrationExpired, msg: fmt.Sprintf("%s %s: calibration expired on %s; recalibrate it or fix cal_due in %s",
				r, si.Asset, si.CalDue.Format("2006-01-02"), e.cfg.Station.File.Name)})
		}
	}
	// A simulated fixture is told which unit it holds.
	for _, r := range e.roles {
		if fl, ok := e.ports[r].(instruments.FixtureLoader); ok {
			err := e.step(ctx, func(ctx context.Context) error { return fl.LoadUnit(ctx, rec.Serial) })
			if err != nil {
				return e.blame(r, err.Error(), fmt.Errorf("load unit into fixture: %w", err))
			}
		}
	}
	if err := runSteps(ctx, u); err != nil {
		return err
	}
	if err := e.checkErrorsBeforeVerdict(ctx); err != nil {
		return err
	}
	finish(u)
	return nil
}

// onlySource is the station's one source role, "" when it has several (a
// failed safe-off then does not say which).
func (e *Engine) onlySource() string {
	if len(e.sources) != 1 {
		return ""
	}
	for r := range e.sources {
		return r
	}
	return ""
}

// runSteps runs the sequence's steps for the unit, in order: a step whose skip_if
// holds is skipped, and once a step ends the run the rest are not reached.
func runSteps(ctx context.Context, u *Unit) error {
	endedAt := "" // the step whose Run ended the run
	for i, d := range u.seq.Steps {
		sr := StepRun{Name: d.Name, Channel: d.Channel, Kind: d.Kind, Stage: d.Stage, Status: StepDone}
		u.step, u.channel = d, d.Channel
		if u.progressed() {
			u.e.stepAt = i
		}
		u.emitStep(EventStepStart, i, "")
		switch {
		case u.ended:
			sr.Status, sr.Note = StepNotReached, notReachedNote(endedAt, u.endNote)
		case d.skip != nil && u.mode != predicting:
			// On paper every result is ideal and any "skip when already good"
			// would hold; the prediction bounds what any unit may need, so it
			// runs every step.
			skip, note, err := d.skip.eval(u)
			if err != nil {
				u.emitStep(EventStepEnd, i, StepStopped)
				return fmt.Errorf("step %q: skip_if: %w", d.Name, err)
			}
			if skip {
				sr.Status, sr.Note = StepSkipped, "skip_if "+d.SkipIf
			} else {
				sr.Note = note
			}
		}
		if sr.Status == StepDone {
			if d.Channel != "" && u.Live() && routed(d) {
				if err := u.e.route(ctx, d.Channel); err != nil {
					u.emitStep(EventStepEnd, i, StepStopped)
					return err
				}
			}
			wasEnded := u.ended
			if err := d.Step.Run(ctx, u); err != nil {
				u.emitStep(EventStepEnd, i, StepStopped)
				return err
			}
			if u.ended && !wasEnded {
				endedAt = d.Name
				sr.Note = strings.TrimPrefix(strings.TrimSpace(sr.Note+"; "+endedNote(u.endNote)), "; ")
			}
		}
		if u.mode != predicting {
			u.Rec.Steps = append(u.Rec.Steps, sr)
		}
		u.emitStep(EventStepEnd, i, sr.Status)
	}
	return nil
}

// endWhy is why a run ended, from the note Unit.End was given, which is worded
// for the results left unmeasured ("not measured: trim saturated"): the cause
// alone ("trim saturated"), or "" when the note gives none.
func endWhy(note string) string {
	return strings.TrimSpace(strings.TrimPrefix(strings.TrimSpace(note), "not measured:"))
}

// endedNote is the note of the step whose Run ended the run.
func endedNote(note string) string {
	if why := endWhy(note); why != "" {
		return "ended the run: " + why
	}
	return "ended the run"
}

// notReachedNote is the note of a step not reached because the step at (a
// name, "" when unknown) ended the run with note.
func notReachedNote(at, note string) string {
	s := "the run ended"
	if at != "" {
		s += fmt.Sprintf(" at step %q", at)
	}
	if why := endWhy(note); why != "" {
		s += ": " + why
	}
	return s
}

// checkErrorsBeforeVerdict reads every error queue once more, under the step
// deadline, so that no entry queued after the last point goes unread into a
// verdict.
func (e *Engine) checkErrorsBeforeVerdict(ctx context.Context) error {
	return e.step(ctx, func(ctx context.Context) error {
		return e.checkErrors(ctx, func() string { return "before the verdict" })
	})
}

func baseName(p string) string {
	if i := strings.LastIndexAny(p, `/\`); i >= 0 {
		return p[i+1:]
	}
	return p
}

func newID(now time.Time) string {
	var b [4]byte
	rand.Read(b[:])
	return now.UTC().Format("20060102T150405.000Z") + "-" + hex.EncodeToString(b[:])
}

func orZero(s string) string {
	if s == "" {
		return "0"
	}
	return s
}

func fmtV(v float64) string { return units.Format(v, "V", 4) }

// fmtResponse formats v, a value of the sequence's response (V, A or a count the
// unit reports), for messages.
func fmtResponse(seq *Sequence, v float64) string {
	switch seq.ResponseDim {
	case units.Ampere:
		return units.Format(v, "A", 4)
	case units.Count:
		return units.FormatNumber(v, 6) + " count"
	}
	return fmtV(v)
}
