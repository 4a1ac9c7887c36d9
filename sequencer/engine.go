// Package sequencer is trimline's engine and the domain it speaks: station and
// sequence files, sweeps, fits, trim codes, verdicts and the run record.
//
// For one serial number the engine opens instruments by role, puts the source in a
// safe state, sweeps the input range before trim, fits a straight line, computes and
// writes the trim codes, reads them back, stores them, sweeps again to verify, judges
// every limit and decides the verdict. Every exit path leaves the source output off.
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
	"math"
	"runtime/debug"
	"strconv"
	"strings"
	"time"

	"github.com/rs/zerolog"

	"trimline/instruments"
	"trimline/instruments/units"
	"trimline/limits"
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
	// NewID returns a run id; nil uses a time-stamped random id.
	NewID func(now time.Time) string
}

// Engine runs units on one opened bench. It is not safe for concurrent use: one
// fixture, one unit at a time.
type Engine struct {
	cfg    Config
	all    map[string]instruments.Instrument
	source instruments.Source
	meter  instruments.Meter
	dut    instruments.TrimPort
	clock  instruments.Clock
	refs   []InstrumentRef
	log    zerolog.Logger // the current run's logger
	closed bool
}

// ErrSafety is wrapped by every refusal to program the source outside the
// station's caps.
var ErrSafety = errors.New("safety cap")

// CheckCaps reports whether the sequence stays inside the station's safety caps.
// It is run at load (trimline check) and again when an Engine opens.
func CheckCaps(st *Station, seq *Sequence) error {
	var errs []string
	for _, sw := range []struct {
		name string
		p    SweepPlan
	}{{"pre_trim", seq.PreTrim}, {"verify", seq.Verify}} {
		for _, v := range []float64{sw.p.From, sw.p.To} {
			if math.Abs(v) > st.MaxSourceVolts {
				errs = append(errs, fmt.Sprintf("%s: %s sweep reaches %s, above the station cap of %s (%s safety.max_source_voltage)",
					sw.p.Where, sw.name, fmtV(v), fmtV(st.MaxSourceVolts), st.File.Name))
				break
			}
		}
	}
	for _, r := range seq.Requires {
		if _, ok := st.Instruments[r]; !ok {
			errs = append(errs, fmt.Sprintf("%s: the sequence requires the %q role, which station %s does not bind", seq.File.Name, r, st.ID))
		}
	}
	if len(errs) > 0 {
		return fmt.Errorf("%w: %s", ErrSafety, strings.Join(errs, "; "))
	}
	return nil
}

// Open checks the station against the sequence, opens every required instrument,
// checks calibration due dates and pinned identities, and puts the source in a
// safe state (level 0, output off). On error nothing stays open.
func Open(ctx context.Context, cfg Config) (*Engine, error) {
	st, seq := cfg.Station, cfg.Sequence
	if err := CheckCaps(st, seq); err != nil {
		return nil, err
	}
	checks, err := CheckTUR(st, seq)
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
		return nil, err
	}
	e := &Engine{cfg: cfg, all: all, clock: instruments.RealClock{}}
	fail := func(err error) (*Engine, error) {
		e.Close()
		return nil, err
	}
	var ok bool
	if e.source, ok = all["source"].(instruments.Source); !ok {
		return fail(fmt.Errorf("source at %s is not a voltage source", st.Instruments["source"].Address))
	}
	if e.meter, ok = all["meter"].(instruments.Meter); !ok {
		return fail(fmt.Errorf("meter at %s is not a voltmeter", st.Instruments["meter"].Address))
	}
	if e.dut, ok = all["dut"].(instruments.TrimPort); !ok {
		return fail(fmt.Errorf("dut at %s is not a trim port", st.Instruments["dut"].Address))
	}
	for _, r := range seq.Requires {
		if cs, ok := all[r].(instruments.ClockSource); ok {
			e.clock = cs.Clock()
			break
		}
	}
	now := e.clock.Now()
	for _, r := range seq.Requires {
		si := st.Instruments[r]
		ref := InstrumentRef{Role: r, Address: si.Address, Asset: si.Asset, Accuracy: si.Accuracy.String(),
			Identity: instruments.Identity{Maker: "0", Model: "0", Serial: "0", Firmware: "0"}}
		if !si.CalDue.IsZero() {
			ref.CalDue = si.CalDue.Format("2006-01-02")
			if now.After(si.CalDue.AddDate(0, 0, 1)) {
				return fail(fmt.Errorf("%s %s: calibration expired on %s; recalibrate it or fix cal_due in %s", r, si.Asset, ref.CalDue, st.File.Name))
			}
		}
		// The DUT's identity belongs to the unit in the fixture, read per run.
		if id, ok := all[r].(instruments.Identifier); ok && r != "dut" {
			got, err := id.Identify(ctx)
			if err != nil {
				return fail(fmt.Errorf("%s: identify: %w", r, err))
			}
			ref.Identity = got
			if si.Model != "" && got.Model != si.Model || si.Serial != "" && got.Serial != si.Serial {
				return fail(fmt.Errorf("%s %s: instrument identifies as model %q serial %q, station file pins model %q serial %q: wrong instrument on the bench",
					r, si.Asset, got.Model, got.Serial, si.Model, si.Serial))
			}
		}
		e.refs = append(e.refs, ref)
	}
	if il := st.Interlock; il != nil {
		if _, ok := all[il.Role].(instruments.Querier); !ok {
			return fail(fmt.Errorf("interlock: the %s at %s cannot be queried", il.Role, st.Instruments[il.Role].Address))
		}
	}
	if err := e.safeState(ctx); err != nil {
		return fail(fmt.Errorf("put source in a safe state: %w", err))
	}
	if err := e.source.SetCompliance(ctx, st.MaxSourceAmps); err != nil {
		return fail(fmt.Errorf("source: set compliance: %w", err))
	}
	if mc, ok := e.meter.(instruments.MeterConfigurer); ok {
		if err := mc.Configure(ctx, seq.Meter.Range, seq.Meter.NPLC); err != nil {
			return fail(fmt.Errorf("meter: configure: %w", err))
		}
	}
	return e, nil
}

// Instrument returns the opened instrument for role, or nil.
func (e *Engine) Instrument(role string) instruments.Instrument { return e.all[role] }

// Close switches the source output off and closes every instrument. Safe to call
// twice.
func (e *Engine) Close() error {
	if e.closed {
		return nil
	}
	e.closed = true
	var first error
	if e.source != nil {
		first = e.safeOff()
	}
	for _, r := range Roles {
		if in, ok := e.all[r]; ok {
			if err := in.Close(); err != nil && first == nil {
				first = err
			}
		}
	}
	return first
}

// safeState programs level 0 with the output off.
func (e *Engine) safeState(ctx context.Context) error {
	if r, ok := e.source.(instruments.Resetter); ok {
		if err := r.Reset(ctx); err != nil {
			return err
		}
	}
	if err := e.source.SetOutput(ctx, false); err != nil {
		return err
	}
	return e.source.SetLevel(ctx, 0)
}

// safeOff switches the output off with a context of its own, so it works after the
// run's context was cancelled.
func (e *Engine) safeOff() error {
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Second)
	defer cancel()
	err := e.source.SetOutput(ctx, false)
	if err2 := e.source.SetLevel(ctx, 0); err == nil {
		err = err2
	}
	return err
}

// stop ends a run early: it carries the verdict and the message.
type stop struct {
	verdict Verdict
	msg     string
}

func (s *stop) Error() string { return s.msg }

// Run trims one serial number and returns its record. Run never returns a nil
// record: a station fault, a cancelled context or a panic are recorded in it with
// verdict FAULT or ABORTED. The source output is off when Run returns.
func (e *Engine) Run(ctx context.Context, serial string) (rec *Record) {
	st, seq := e.cfg.Station, e.cfg.Sequence
	now := e.clock.Now().UTC()
	rec = &Record{
		Schema: RecordSchema, Serial: serial, Product: seq.Product, Revision: seq.Revision,
		Station: st.ID, Operator: e.cfg.Operator, Software: e.cfg.Software, Started: now,
		Files:       []FileRef{st.File, seq.File, seq.LimitsFile},
		Instruments: append([]InstrumentRef(nil), e.refs...),
		IdealGain:   seq.IdealGain, IdealOffset: seq.IdealOffset, FullScale: seq.FullScale,
		Conditions: e.cfg.Conditions, Coverage: e.coverage(), Engineering: e.cfg.Engineering,
	}
	if e.cfg.NewID != nil {
		rec.RunID = e.cfg.NewID(now)
	} else {
		rec.RunID = newID(now)
	}
	log := e.cfg.Log.With().Str("serial", serial).Str("run", rec.RunID).Logger()
	e.log = log
	defer func() {
		if p := recover(); p != nil {
			log.Error().Str("stack", string(debug.Stack())).Msgf("panic: %v", p)
			rec.Verdict, rec.Fault = Fault, fmt.Sprintf("internal error: %v", p)
		}
		if err := e.safeOff(); err == nil {
			log.Debug().Msg("source output off, level 0")
		} else {
			log.Error().Err(err).Msg("could not switch the source output off")
			if rec.Verdict != Aborted {
				rec.Verdict = Fault
			}
			rec.Fault = strings.TrimPrefix(rec.Fault+"; source output off failed: "+err.Error(), "; ")
		}
		rec.Finished = e.clock.Now().UTC()
	}()
	err := e.run(ctx, rec)
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
	if rec.Verdict == Fault || rec.Verdict == Aborted {
		log.Warn().Str("verdict", string(rec.Verdict)).Msg(rec.Fault)
	}
	return rec
}

func (e *Engine) run(ctx context.Context, rec *Record) error {
	seq := e.cfg.Sequence
	// A long batch can outlive a calibration: check every unit, not just at open.
	for _, r := range seq.Requires {
		si := e.cfg.Station.Instruments[r]
		if !si.CalDue.IsZero() && rec.Started.After(si.CalDue.AddDate(0, 0, 1)) {
			return &stop{Fault, fmt.Sprintf("%s %s: calibration expired on %s; recalibrate it or fix cal_due in %s",
				r, si.Asset, si.CalDue.Format("2006-01-02"), e.cfg.Station.File.Name)}
		}
	}
	if err := e.step(ctx, func(ctx context.Context) error { return e.identifyUnit(ctx, rec) }); err != nil {
		return err
	}

	// Known starting state: record what the unit holds, then apply no correction.
	trims := []TrimCode{{DAC: "gain"}, {DAC: "offset"}}
	dacs := []DAC{seq.Trim.Gain, seq.Trim.Offset}
	for i, d := range dacs {
		err := e.step(ctx, func(ctx context.Context) error {
			c, err := e.readCode(ctx, trims[i].DAC, d)
			trims[i].Before = c
			return err
		})
		if err != nil {
			return err
		}
		if err := e.writeCode(ctx, trims[i].DAC, d, d.NoCorrection); err != nil {
			return err
		}
	}
	return e.measure(ctx, rec, trims)
}

// identifyUnit places the unit in a simulated fixture, checks it reports the
// scanned serial and records its firmware.
func (e *Engine) identifyUnit(ctx context.Context, rec *Record) error {
	seq := e.cfg.Sequence
	if fl, ok := e.dut.(instruments.FixtureLoader); ok {
		if err := fl.LoadUnit(ctx, rec.Serial); err != nil {
			return fmt.Errorf("load unit into fixture: %w", err)
		}
	}
	if q := seq.DUT.SerialQuery; q != "" {
		got, err := e.dut.Query(ctx, q)
		if err != nil {
			return fmt.Errorf("dut: read serial number: %w", err)
		}
		if strings.TrimSpace(got) != rec.Serial {
			return &stop{Fault, fmt.Sprintf("the unit in the fixture reports serial %q but %q was scanned: wrong unit in the fixture", strings.TrimSpace(got), rec.Serial)}
		}
	}
	if q := seq.DUT.FirmwareQuery; q != "" {
		fw, err := e.dut.Query(ctx, q)
		if err != nil {
			return fmt.Errorf("dut: read firmware id: %w", err)
		}
		for i := range rec.Instruments {
			if rec.Instruments[i].Role == "dut" {
				rec.Instruments[i].Identity = instruments.Identity{Maker: orZero(seq.Maker), Model: orZero(seq.Product), Serial: rec.Serial, Firmware: strings.TrimSpace(fw)}
			}
		}
	}
	return nil
}

// measure runs the sweeps, the trim and the verification for a unit whose trim
// DACs hold no correction.
func (e *Engine) measure(ctx context.Context, rec *Record, trims []TrimCode) error {
	seq := e.cfg.Sequence
	dacs := []DAC{seq.Trim.Gain, seq.Trim.Offset}

	pre, err := e.sweep(ctx, "pre-trim", seq.PreTrim)
	e.annotate(&pre)
	rec.Sweeps = append(rec.Sweeps, pre)
	if err != nil {
		return err
	}
	res := newResults()
	if !e.evalPre(rec, res, pre, trims) {
		e.finish(rec, res)
		return nil
	}
	trims = rec.Trims

	for i := range trims {
		if err := e.writeCode(ctx, trims[i].DAC, dacs[i], trims[i].Code); err != nil {
			return err
		}
		trims[i].Readback, trims[i].Written = trims[i].Code, true
	}
	if seq.Trim.Store != "" {
		err := e.step(ctx, func(ctx context.Context) error { return e.dut.Command(ctx, seq.Trim.Store) })
		if err != nil {
			return fmt.Errorf("dut: store trim codes: %w", err)
		}
		for i := range trims {
			trims[i].Stored = true
		}
	}
	rec.Trims = trims

	post, err := e.sweep(ctx, "verify", seq.Verify)
	e.annotate(&post)
	rec.Sweeps = append(rec.Sweeps, post)
	if err != nil {
		return err
	}
	e.evalPost(rec, res, post)
	e.finish(rec, res)
	return nil
}

// evalPre computes the pre-trim results and the trim codes from the pre-trim sweep
// into rec and res. It reports false when the run cannot go on (no usable fit, no
// trim possible, a saturated trim); the reasons are then in rec and res. It does
// no I/O, so a replay of a stored record runs the very same arithmetic.
func (e *Engine) evalPre(rec *Record, res *results, pre Sweep, trims []TrimCode) bool {
	seq := e.cfg.Sequence
	dacs := []DAC{seq.Trim.Gain, seq.Trim.Offset}
	rec.Trims = trims // at least what the unit held before; codes follow when computed
	preA, ferr := e.analyse(pre, rec.RunID)
	if ferr != nil {
		res.invalidAll("pre-trim sweep: " + ferr.Error())
		return false
	}
	preFit := preA.sum
	rec.Fits = append(rec.Fits, preFit)
	e.fitResults(res, preA, ResPreOffset, ResPreGainError, ResPreNonlinearity)

	sol, err := ComputeTrim(seq.Trim, preFit.Slope, preFit.Intercept, seq.Trim.Gain.NoCorrection, seq.Trim.Offset.NoCorrection, seq.IdealGain, seq.IdealOffset)
	if err != nil {
		res.invalidFrom(ResOffsetCode, "cannot compute trim: "+err.Error())
		rec.Reasons = append(rec.Reasons, "cannot compute trim codes: "+err.Error())
		return false
	}
	trims[0].Ideal, trims[0].Code, trims[0].Saturated = sol.GainIdeal, sol.Gain, sol.GainSat
	trims[1].Ideal, trims[1].Code, trims[1].Saturated = sol.OffsetIdeal, sol.Offset, sol.OffsetSat
	trims[0].IdealU, trims[1].IdealU = idealCodeU(seq.Trim, preA, sol)
	rec.Trims = trims
	res.set(ResGainCode, float64(sol.Gain))
	res.set(ResOffsetCode, float64(sol.Offset))
	var sat []string
	for i, t := range trims {
		if t.Saturated {
			sat = append(sat, fmt.Sprintf("%s trim needs code %.1f, outside the DAC's range 0..%d", t.DAC, t.Ideal, dacs[i].MaxCode()))
		}
	}
	if len(sat) > 0 {
		rec.Reasons = append(rec.Reasons, sat...)
		res.invalidFrom(ResPostOffset, "not measured: trim saturated")
		res.values[ResGainCode] = limits.Value{V: float64(sol.Gain), Valid: !sol.GainSat, Why: "gain trim saturated"}
		res.values[ResOffsetCode] = limits.Value{V: float64(sol.Offset), Valid: !sol.OffsetSat, Why: "offset trim saturated"}
		return false
	}
	return true

}

// evalPost computes the post-trim results from the verification sweep.
func (e *Engine) evalPost(rec *Record, res *results, post Sweep) {
	seq := e.cfg.Sequence
	postA, ferr := e.analyse(post, rec.RunID)
	if ferr != nil {
		res.invalidFrom(ResPostOffset, "verification sweep: "+ferr.Error())
	} else {
		rec.Fits = append(rec.Fits, postA.sum)
		e.fitResults(res, postA, ResPostOffset, ResPostGainError, ResPostNonlinearity)
		// The largest deviation from the ideal transfer, with that point's own
		// uncertainty; the noise as the pooled standard deviation of the
		// readings, with u(s) ≈ s/√(2ν) (JCGM 100 E.4.3).
		imax := 0
		dev := func(p Point) float64 { return math.Abs(p.Mean - (seq.IdealGain*p.Stimulus + seq.IdealOffset)) }
		for i, p := range post.Points {
			if dev(p) > dev(post.Points[imax]) {
				imax = i
			}
		}
		u, dof := pointErrorU(post.Points[imax], postA.poolDOF)
		res.setU(ResPostMaxError, dev(post.Points[imax]), e.unc(u, dof))
		if sp, nu := pooledSD(post.Points); nu > 0 {
			res.setU(ResPostNoise, sp, e.unc(sp/math.Sqrt(2*nu), nu))
		} else {
			res.invalid(ResPostNoise, "one reading per point: no noise estimate")
		}
	}
}

// finish stores the results and judges them.
func (e *Engine) finish(rec *Record, res *results) {
	rec.Results = res.list()
	e.judge(rec, res)
}

// judge evaluates every limit and sets the verdict following the limit file's
// policy for conditional zones; earlier reasons (a saturated trim) make it FAIL.
func (e *Engine) judge(rec *Record, res *results) {
	set := e.cfg.Sequence.Limits
	rec.Coverage = e.coverage()
	rec.Outcomes = set.Judge(res.values)
	failedBefore := len(rec.Reasons) > 0
	// As-found limits first (an untrimmed value far out names an assembly fault, the
	// real cause), then what stopped the run (a saturated trim), then the rest.
	var asFound, later []string
	for _, o := range rec.Outcomes {
		if o.Pass {
			continue
		}
		r := fmt.Sprintf("limit %q: %s", o.Name, o.Reason)
		if usesPre(o.Uses) {
			asFound = append(asFound, r)
		} else {
			later = append(later, r)
		}
	}
	rec.Reasons = append(append(asFound, rec.Reasons...), later...)
	switch overall := set.Overall(rec.Outcomes); {
	case failedBefore || overall == "fail":
		rec.Verdict = Fail
	case overall == "review":
		rec.Verdict = Review
	default:
		rec.Verdict = Pass
	}
}

func usesPre(names []string) bool {
	for _, n := range names {
		if strings.HasPrefix(n, "pre_") {
			return true
		}
	}
	return false
}

// idealCodeU propagates the pre-trim fit's uncertainty to the exact codes, to first
// order: the gain code depends on the slope, the offset code on the intercept.
func idealCodeU(t TrimPlan, a analysis, sol TrimSolution) (gainU, offsetU float64) {
	u0, u1 := math.Sqrt(a.lf.Cov[0][0]), math.Sqrt(a.lf.Cov[1][1])
	slope := a.sum.Slope
	g0 := gainFactor(t.Gain, float64(t.Gain.NoCorrection))
	g1 := gainFactor(t.Gain, float64(sol.Gain))
	// ∂(gain code)/∂a = −G·g0/(a²·LSB); with G·g0/a ≈ 1 after trim: ≈ 1/(a·LSB).
	gainU = u1 * (slope * g1 / g0) / (slope * slope * t.Gain.LSB)
	if t.OffsetBeforeGain {
		offsetU = u0 / (g0 * (slope / g0) * t.Offset.LSB)
	} else {
		offsetU = u0 * g1 / (g0 * t.Offset.LSB)
	}
	return math.Abs(gainU), math.Abs(offsetU)
}

// sweep steps the source across p and reads the meter at each level. The output is
// switched on after the first level is programmed and off again at the end.
func (e *Engine) sweep(ctx context.Context, name string, p SweepPlan) (Sweep, error) {
	sw := Sweep{Name: name}
	for i, x := range p.Levels() {
		err := e.step(ctx, func(ctx context.Context) error {
			if err := e.checkInterlock(ctx); err != nil {
				return err
			}
			if err := e.setLevel(ctx, x); err != nil {
				return err
			}
			if i == 0 {
				if err := e.source.SetOutput(ctx, true); err != nil {
					return fmt.Errorf("%s sweep: source output on: %w", name, err)
				}
			}
			if err := e.clock.Sleep(ctx, p.Settle); err != nil {
				return err
			}
			rs, err := e.meter.Read(ctx, p.Readings)
			if err != nil {
				return fmt.Errorf("%s sweep at %s: read meter: %w", name, fmtV(x), err)
			}
			sw.Points = append(sw.Points, point(x, rs))
			// The unit's output cannot leave its supply rails, so an overload or
			// not-a-number on the meter's range is the station's problem (range,
			// wiring, a failing meter), not a measurement of the unit.
			for j, r := range rs {
				if !r.Valid() {
					return &stop{Fault, fmt.Sprintf("%s sweep at %s: meter reported %s (reading %d of %d): check the meter range and the wiring",
						name, fmtV(x), firstBad(rs[j:j+1]), j+1, len(rs))}
				}
			}
			return nil
		})
		if err != nil {
			return sw, err
		}
		e.log.Debug().Str("sweep", name).Float64("x", x).Float64("y", sw.Points[i].Mean).Msg("point")
	}
	if err := e.step(ctx, func(ctx context.Context) error { return e.source.SetOutput(ctx, false) }); err != nil {
		return sw, fmt.Errorf("%s sweep: source output off: %w", name, err)
	}
	return sw, nil
}

// step runs one engine step under the station's step deadline, if any. A step that
// overruns it is a station fault naming the deadline.
func (e *Engine) step(ctx context.Context, f func(ctx context.Context) error) error {
	d := e.cfg.Station.StepDeadline
	if d <= 0 {
		return f(ctx)
	}
	sctx, cancel := context.WithTimeoutCause(ctx, d, errStepDeadline)
	defer cancel()
	err := f(sctx)
	if err != nil && ctx.Err() == nil && context.Cause(sctx) == errStepDeadline {
		return &stop{Fault, fmt.Sprintf("step deadline of %s exceeded (station file step_deadline): %v", d, err)}
	}
	return err
}

var errStepDeadline = errors.New("step deadline exceeded")

// checkInterlock reads the fixture interlock, when the station has one, and stops
// the run unless it answers closed. It runs before the output is switched on and
// before every sweep point.
func (e *Engine) checkInterlock(ctx context.Context) error {
	il := e.cfg.Station.Interlock
	if il == nil {
		return nil
	}
	q := e.all[il.Role].(instruments.Querier)
	got, err := q.Query(ctx, il.Query)
	if err != nil {
		return fmt.Errorf("interlock: %s %q: %w", il.Role, il.Query, err)
	}
	if strings.TrimSpace(got) != il.Closed {
		return &stop{Fault, fmt.Sprintf("interlock open: %s answered %q to %q, expected %q; close the fixture lid", il.Role, strings.TrimSpace(got), il.Query, il.Closed)}
	}
	return nil
}

// setLevel programs the source after checking the station cap once more.
func (e *Engine) setLevel(ctx context.Context, volts float64) error {
	if !finite(volts) || math.Abs(volts) > e.cfg.Station.MaxSourceVolts {
		return &stop{Fault, fmt.Sprintf("%v: refusing to program %s, above the station cap of %s", ErrSafety, fmtV(volts), fmtV(e.cfg.Station.MaxSourceVolts))}
	}
	if err := e.source.SetLevel(ctx, volts); err != nil {
		return fmt.Errorf("source: set level %s: %w", fmtV(volts), err)
	}
	return nil
}

// point summarises the readings at one level. Mean and SD are over the valid
// readings; a point with any invalid reading cannot be fitted.
func point(x float64, rs []instruments.Reading) Point {
	p := Point{Stimulus: x, Readings: rs}
	var sum float64
	for _, r := range rs {
		if r.Valid() {
			p.Valid++
			sum += r.Value
		}
	}
	if p.Valid == 0 {
		p.Mean, p.SD = math.NaN(), math.NaN()
		return p
	}
	p.Mean = sum / float64(p.Valid)
	if p.Valid > 1 {
		var ss float64
		for _, r := range rs {
			if r.Valid() {
				ss += (r.Value - p.Mean) * (r.Value - p.Mean)
			}
		}
		p.SD = math.Sqrt(ss / float64(p.Valid-1))
	}
	return p
}

func (e *Engine) writeCode(ctx context.Context, name string, d DAC, code int) error {
	return e.step(ctx, func(ctx context.Context) error { return e.writeCodeStep(ctx, name, d, code) })
}

func (e *Engine) writeCodeStep(ctx context.Context, name string, d DAC, code int) error {
	line := strings.ReplaceAll(d.Write, "{code}", strconv.Itoa(code))
	if err := e.dut.Command(ctx, line); err != nil {
		return fmt.Errorf("dut: write %s trim code %d: %w", name, code, err)
	}
	got, err := e.readCode(ctx, name, d)
	if err != nil {
		return err
	}
	if got != code {
		return &stop{Fault, fmt.Sprintf("dut: %s trim read back %d after writing %d", name, got, code)}
	}
	return nil
}

func (e *Engine) readCode(ctx context.Context, name string, d DAC) (int, error) {
	reply, err := e.dut.Query(ctx, d.Read)
	if err != nil {
		return 0, fmt.Errorf("dut: read %s trim code: %w", name, err)
	}
	c, err := strconv.Atoi(strings.TrimSpace(reply))
	if err != nil {
		return 0, &stop{Fault, fmt.Sprintf("dut: %s trim read-back %q is not a code", name, reply)}
	}
	return c, nil
}

// results collects the named results of one run.
type results struct {
	values map[string]limits.Value
	unc    map[string]Uncertainty
}

func newResults() *results {
	r := &results{values: map[string]limits.Value{}, unc: map[string]Uncertainty{}}
	for _, n := range resultOrder {
		r.values[n] = limits.Value{Why: "not measured"}
	}
	return r
}

func (r *results) set(name string, v float64) {
	r.values[name] = limits.Value{V: v, Valid: finite(v), Why: "not a finite number"}
}

// setU sets a result with its uncertainty.
func (r *results) setU(name string, v float64, u Uncertainty) {
	r.values[name] = limits.Value{V: v, Valid: finite(v), Why: "not a finite number",
		Std: u.Std, U: u.Expanded, K: u.K, DOF: u.DOF}
	r.unc[name] = u
}

func (r *results) invalid(name, why string) {
	r.values[name] = limits.Value{Why: why}
	delete(r.unc, name)
}

func (r *results) invalidAll(why string) {
	for _, n := range resultOrder {
		r.invalid(n, why)
	}
}

// invalidFrom marks name and every later result invalid.
func (r *results) invalidFrom(name, why string) {
	on := false
	for _, n := range resultOrder {
		on = on || n == name
		if on {
			r.invalid(n, why)
		}
	}
}

func (r *results) list() []Result {
	out := make([]Result, 0, len(resultOrder))
	for _, n := range resultOrder {
		v := r.values[n]
		res := Result{Name: n, Value: v.V, Unit: unitName(ResultCatalog[n]), Valid: v.Valid, Unc: r.unc[n]}
		if !v.Valid {
			res.Value, res.Note = 0, v.Why
		}
		out = append(out, res)
	}
	return out
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
func fmtA(v float64) string { return units.Format(v, "A", 4) }
