package sequencer

// The per-unit context every step runs against.

import (
	"context"
	"fmt"
	"math"
	"strings"
	"time"

	"github.com/rs/zerolog"

	"trimline/instruments"
	"trimline/instruments/units"
	"trimline/limits"
	"trimline/sequencer/uncertainty"
)

// How a step list runs for a unit.
type mode int

const (
	live       mode = iota // on the bench: steps do I/O through the engine's instruments
	replaying              // from a stored record: steps take the facts of the run from it
	predicting             // on paper: sweeps see the ideal transfer, nothing is judged
)

// Unit is the state of one unit's run: its record, the results so far, what each
// step kept for later steps (a sweep's points, a fit), the codes its trim DACs
// hold. Steps read and write it; nothing of a unit lives in a step, an instrument
// or a global, so several units' step lists can run at once on their own Units.
// A Unit is used by one goroutine at a time.
type Unit struct {
	Serial string
	Rec    *Record

	cfg    Config
	seq    *Sequence
	e      *Engine // nil unless live
	mode   mode
	stored *Record // replaying: the record being recomputed
	log    zerolog.Logger

	res   *results
	kept  map[string]any // by step name
	codes map[string]int // trim DAC name → code it holds now, where known

	ended   bool
	endNote string
	// tempC is the unit's temperature as the last soak left it, °C, when
	// tempKnown: every later sweep records it.
	tempC     float64
	tempKnown bool
	// zeros are the latest zero check of each source role (and channel), for
	// the sweeps after it (step_zero.go).
	zeros   map[string]zeroKept
	step    *StepDecl // the step running
	channel string    // the unit's channel the running step works on, "" for a one-channel unit
}

// Channel is the unit's channel the running step works on: one of the sequence's
// channel names, or "" for a one-channel unit.
func (u *Unit) Channel() string { return u.channel }

// Fill returns template with every {channel} replaced by the running step's channel.
func (u *Unit) Fill(template string) string {
	return strings.ReplaceAll(template, "{channel}", u.channel)
}

func newUnit(cfg Config, rec *Record, m mode) *Unit {
	// Revision 1 applies each spec as it holds at the recorded ambient:
	// widened by its tempco outside its band (Station.atAmbient).
	if rec.Metrology >= 1 {
		cfg.Station = cfg.Station.atAmbient(rec.Conditions)
	}
	return &Unit{Serial: rec.Serial, Rec: rec, cfg: cfg, seq: cfg.Sequence, mode: m, log: cfg.Log,
		res: newResults(cfg.Sequence), kept: map[string]any{}, codes: map[string]int{}}
}

// addSweep adds sw to the record, marked with the temperature the last soak
// left the unit at.
func (u *Unit) addSweep(sw Sweep) Sweep {
	// The last soak's temperature; a replayed sweep no soak of the replay
	// precedes keeps the temperature its record gave it.
	if u.tempKnown || !sw.TempKnown {
		sw.TempC, sw.TempKnown = u.tempC, u.tempKnown
	}
	u.Rec.Sweeps = append(u.Rec.Sweeps, sw)
	return sw
}

// Live reports whether the unit is on the bench (not a replay or a prediction):
// only then may a step do I/O.
func (u *Unit) Live() bool { return u.mode == live }

// Replaying reports whether the run is recomputed from a stored record; Stored
// is then that record.
func (u *Unit) Replaying() bool { return u.mode == replaying }

// Predicting reports whether the run is the TUR prediction: sweeps see a unit
// with exactly the ideal transfer and no noise.
func (u *Unit) Predicting() bool { return u.mode == predicting }

// Metrology is the revision of the measurement rules the unit is computed by:
// CurrentMetrology for a run on the bench or on paper, the stored record's for a
// replay (Record.Metrology). A step whose computation changed between revisions
// asks it, so an old record re-derives as it was certified.
func (u *Unit) Metrology() int { return u.Rec.Metrology }

// Stored is the record being replayed, nil otherwise.
func (u *Unit) Stored() *Record { return u.stored }

// Sequence is the sequence in force.
func (u *Unit) Sequence() *Sequence { return u.seq }

// key is name on the running step's channel (limits.ChannelKey): what a step of
// a multi-channel unit keeps, sets and reads is its channel's.
func (u *Unit) key(name string) string { return limits.ChannelKey(name, u.channel) }

// Keep stores what the running step leaves for later steps, under its name (and
// channel).
func (u *Unit) Keep(v any) { u.kept[u.key(u.step.Name)] = v }

// Kept returns what the step called name kept, nil when it did not run: on the
// running step's channel when that step ran per channel, else what it kept for
// the whole unit.
func (u *Unit) Kept(name string) any {
	if v, ok := u.kept[u.key(name)]; ok {
		return v
	}
	return u.kept[name]
}

// Code returns the code trim DAC name holds on the running step's channel, as
// far as the run knows.
func (u *Unit) Code(name string) (int, bool) {
	c, ok := u.codes[u.key(name)]
	return c, ok
}

// SetCode records that trim DAC name (on the running step's channel) now holds
// code.
func (u *Unit) SetCode(name string, code int) { u.codes[u.key(name)] = code }

// End stops the unit's run after the running step: the later steps are not run,
// and every result not yet computed is invalid with note as the reason.
func (u *Unit) End(note string) {
	u.ended, u.endNote = true, note
}

// Fail adds a reason the unit fails, whatever its limits say.
func (u *Unit) Fail(reason string) { u.Rec.Reasons = append(u.Rec.Reasons, reason) }

// Fault returns the error that stops the run as a station fault with msg: the
// station could not measure, so nothing is judged.
func (u *Unit) Fault(format string, args ...any) error {
	return &stop{verdict: Fault, msg: fmt.Sprintf(format, args...)}
}

// Set records result name with value v (an exact number: no uncertainty). In a
// step that runs per channel, the result is the running channel's.
func (u *Unit) Set(name string, v float64) { u.res.set(u.key(name), v) }

// SetU records result name with value v and its uncertainty (the running
// channel's, as Set).
func (u *Unit) SetU(name string, v float64, unc Uncertainty) { u.res.setU(u.key(name), v, unc) }

// Invalid records that result name could not be computed, and why (the running
// channel's, as Set).
func (u *Unit) Invalid(name, why string) { u.res.invalid(u.key(name), why) }

// Result returns the value of a result computed so far: in a step that runs per
// channel, a per-channel result is the running channel's.
func (u *Unit) Result(name string) (v float64, valid bool) {
	r, ok := u.res.values[u.key(name)]
	if !ok {
		r, ok = u.res.values[name]
	}
	return r.V, ok && r.Valid
}

// onChannel is d with {channel} in its command templates filled for the
// running step's channel.
func (u *Unit) onChannel(d DAC) DAC {
	d.Write, d.Read = u.Fill(d.Write), u.Fill(d.Read)
	return d
}

// Unc expands a standard uncertainty u (in the unit of its value) with dof
// degrees of freedom at the limit file's coverage probability, with the
// sequence's evaluation method.
//
// From metrology revision 1 on, Expanded is the stated U: k·u rounded up to two
// significant digits (StatedU), rounded here once. The record stores it, the
// limits judge with it (guard band and acceptance limits, TUR, PFA) and every
// document prints it. Std and K stay as evaluated, so U ≥ K·Std. Revision 0
// stores k·u unrounded, as it did. A prediction on paper (PredictUncertainty)
// states U the same way, so the TUR that check and the start-of-run TUR check
// promise is the TUR the bench's certificates will show.
func (u *Unit) Unc(std, dof float64) Uncertainty {
	if !(std >= 0) || math.IsInf(std, 0) {
		return Uncertainty{}
	}
	if dof <= 0 || math.IsNaN(dof) {
		dof = math.Inf(1)
	}
	k, U := uncertainty.Expand(std, dof, coverage(u.seq))
	if u.Metrology() >= 1 {
		U = StatedU(U)
	}
	return Uncertainty{Std: std, DOF: dof, K: k, Expanded: U, Method: method(u.seq, u.Metrology())}
}

// IntervalUnc is the uncertainty of a result whose expanded uncertainty comes
// from a coverage interval rather than from k·u: U (the interval's larger
// half-width about the value), stated as Unc states every U (rounded up from
// metrology revision 1, so value ± U still holds the whole interval), with
// standard uncertainty std, k = U/std, and dof for reference.
func (u *Unit) IntervalUnc(std, dof, U float64) Uncertainty {
	unc := u.Unc(std, dof)
	if std > 0 {
		if u.Metrology() >= 1 {
			U = StatedU(U)
		}
		unc.K, unc.Expanded = U/std, U
	}
	return unc
}

// StatedU is an evaluated expanded uncertainty as a result states it: rounded
// up to two significant digits (JCGM 100:2008 §7.2.6 allows rounding up; up is
// the conservative choice for a guard band w = r·U, which is then never
// narrower than the evaluation supports). A step that builds an Uncertainty
// without Unit.Unc states its U with this function (metrology revision ≥ 1).
func StatedU(U float64) float64 {
	r, _ := units.RoundU(U)
	return r
}

// Do runs f as one engine step under the station's step deadline (re-arming the
// source's output watchdog first). Only live steps do I/O; Do refuses otherwise.
func (u *Unit) Do(ctx context.Context, f func(ctx context.Context) error) error {
	if err := u.liveOnly(); err != nil {
		return err
	}
	return u.e.step(ctx, f)
}

// Level programs the source bound to role to level, in volts (amperes on a
// current source), after the fixture interlock and the station's cap are
// checked once more (a level beyond the cap stops the run as a station fault,
// ErrSafety). The output is not switched; every source's
// output is switched off and its level set to 0 when the run ends, whatever
// happens. Call it inside Do. A step that calls it must list the level in its
// Stimuli, so that the caps are checked at load too.
func (u *Unit) Level(ctx context.Context, role string, level float64) error {
	if err := u.liveOnly(); err != nil {
		return err
	}
	if _, ok := u.e.sources[role]; !ok {
		return fmt.Errorf("%s is not a source", role)
	}
	d := units.Volt
	if _, ok := u.e.currents[role]; ok {
		d = units.Ampere
	}
	if !u.declared(role, level, d) {
		return &stop{verdict: Fault, cause: ErrSafety, msg: fmt.Sprintf("%v: step %q programs %s on the %s, a level its Stimuli did not declare (so the caps were not checked on it at load)",
			ErrSafety, u.step.Name, fmtStim(d, level), role)}
	}
	if err := u.e.checkInterlock(ctx); err != nil {
		return err
	}
	return u.e.setLevel(ctx, role, level)
}

// declared reports whether the running step lists level (of dimension d) on
// role in its Stimuli.
func (u *Unit) declared(role string, level float64, d units.Dim) bool {
	st, ok := u.step.Step.(Stimulator)
	if !ok {
		return false
	}
	for _, x := range st.Stimuli() {
		if x.Role == role && x.Dim == d && x.Level == level {
			return true
		}
	}
	return false
}

// Output switches the output of the source bound to role on or off; on checks
// the fixture interlock first. Call it inside Do.
func (u *Unit) Output(ctx context.Context, role string, on bool) error {
	if err := u.liveOnly(); err != nil {
		return err
	}
	src, ok := u.e.sources[role]
	if !ok {
		return fmt.Errorf("%s is not a source", role)
	}
	if on {
		if err := u.e.checkInterlock(ctx); err != nil {
			return err
		}
	}
	return u.e.blame(role, "", src.SetOutput(ctx, on))
}

// Read takes n readings in a row from the meter bound to role, set to p (its
// range and integration time; the sequence's meter: settings when p is zero).
// Call it inside Do.
func (u *Unit) Read(ctx context.Context, role string, n int, p MeterPlan) ([]instruments.Reading, error) {
	if err := u.liveOnly(); err != nil {
		return nil, err
	}
	m, ok := u.e.meters[role]
	if !ok {
		return nil, fmt.Errorf("%s is not a meter", role)
	}
	if p == (MeterPlan{}) {
		p = u.seq.Meter
	}
	if err := u.e.configureMeter(ctx, role, p); err != nil {
		return nil, err
	}
	rs, err := m.Read(ctx, n)
	return rs, u.e.blame(role, "", err)
}

// Wait waits d on the bench's clock (the simulated bench's own clock on the
// simulator), or until ctx ends.
func (u *Unit) Wait(ctx context.Context, d time.Duration) error {
	if err := u.liveOnly(); err != nil {
		return err
	}
	return u.e.clock.Sleep(ctx, d)
}

// liveOnly is the error of instrument I/O outside a live run (a step that forgot
// its u.Live() test, replayed or predicted).
func (u *Unit) liveOnly() error {
	if u.e == nil {
		return fmt.Errorf("step %q: instrument I/O outside a live run", u.step.Name)
	}
	return nil
}

// Port returns the DUT port bound to role.
func (u *Unit) Port(role string) (instruments.TrimPort, error) {
	if err := u.liveOnly(); err != nil {
		return nil, err
	}
	p, ok := u.e.all[role].(instruments.TrimPort)
	if !ok {
		return nil, fmt.Errorf("%s is not a DUT port", role)
	}
	return p, nil
}

// method is the evaluation method Unc states. From metrology revision 1 on,
// only a result evaluated from a Monte Carlo coverage interval (analysis.unc)
// says "MC"; the rest of a monte_carlo sequence's results are the law of
// propagation's and say so. Revision 0 labelled every result of such a
// sequence "MC".
func method(seq *Sequence, rules int) string {
	if seq.Uncertainty == "monte_carlo" && rules < 1 {
		return "MC"
	}
	return "GUM"
}

// coverage is the limit file's coverage probability, 0.9545 when it sets none.
func coverage(seq *Sequence) float64 {
	if s := seq.Limits; s != nil {
		if p := s.Policy().Coverage; p > 0 && p < 1 {
			return p
		}
	}
	return 0.9545
}
