package sequencer

// The retrim step: a closed-loop re-trim of one DAC. It measures the output error
// at a few levels with the code the DAC holds, moves the code by the error over
// the trim's sensitivity (nominal at first, then measured between the codes
// tried), and repeats until the error is within a bound or the passes run out.
// It corrects what an open-loop trim cannot know: a DAC whose steps are uneven.

import (
	"context"
	"fmt"
	"math"
	"strings"
	"time"

	"trimline/instruments/units"
	"trimline/sequencer/uncertainty"
)

func init() {
	RegisterStep(StepKind{Name: "retrim", PerChannel: true, About: "re-trims one DAC in closed loop: measures the output error at its levels, moves the code by the error over the measured sensitivity, until the error is within a bound",
		New: func() Step { return new(retrimStep) }})
}

// Bounds of a re-trim's passes.
const (
	DefaultRetrimPasses = 6
	MaxRetrimPasses     = 20
)

// The results a retrim step can give, as its results: map names them.
var retrimOutputs = map[string]string{
	"code":   "code the DAC holds after the re-trim",
	"error":  "output error with that code: mean over the levels of mean − ideal, in the response's unit",
	"passes": "passes the re-trim measured",
}

// retrimStep is a retrim step as the sequence file writes it.
type retrimStep struct {
	DAC       string            `yaml:"dac"`
	Levels    []level           `yaml:"levels"`
	Settle    *units.Duration   `yaml:"settle"`
	Readings  int               `yaml:"readings"`
	Source    string            `yaml:"source"`
	Meter     string            `yaml:"meter"`
	Response  *responseDecl     `yaml:"response"`
	Stage     string            `yaml:"stage"`
	MeterSet  *units.Quantity   `yaml:"meter_range"`
	NPLC      *float64          `yaml:"nplc"`
	Within    string            `yaml:"within"`
	MaxPasses *int              `yaml:"max_passes"`
	Results   map[string]string `yaml:"results"`

	dac       DAC
	plan      SweepPlan // one pass: the levels, settle, readings, roles and meter settings
	nominal   float64   // the DAC's nominal response per code at the levels, response's unit per code, signed
	pivot     float64   // the earlier trim's pivot, in the response's unit (a gain DAC scales about it)
	bound     float64   // |error| within which the re-trim stops, in the response's unit
	maxPasses int
	outs      map[string]string // what → result name
}

var (
	_ Stimulator = (*retrimStep)(nil)
	_ Timed      = (*retrimStep)(nil)
)

func (s *retrimStep) Check(c *Checker) {
	c.SetStage(Adjustment) // the stage key may set another for the error result
	seq := c.Sequence()
	p := SweepPlan{}
	inBounds := checkReadings(c, readingKeys{source: s.Source, meter: s.Meter, response: s.Response, quantity: seq.ResponseDim, stage: s.Stage, meterRange: s.MeterSet, nplc: s.NPLC,
		settle: s.Settle, readings: s.Readings}, 2, "2 readings (one gives no noise estimate for the error's uncertainty)", &p)
	for i, l := range s.Levels {
		v, _ := c.level(fmt.Sprintf("levels[%d]", i), l)
		p.List = append(p.List, v)
	}
	switch p.Points = len(p.List); {
	case s.Levels == nil:
		c.Errorf("", "missing required key \"levels\" (the stimulus levels the error is measured at, e.g. levels: [0 V])")
	case p.Points == 0:
		c.Errorf("levels", "expected at least 1 level")
	case p.Points > MaxPoints:
		c.Errorf("levels", "expected at most %d levels, found %d", MaxPoints, p.Points)
	default:
		p.From, p.To = p.List[0], p.List[p.Points-1]
	}

	s.maxPasses = DefaultRetrimPasses
	if s.MaxPasses != nil {
		if s.maxPasses = *s.MaxPasses; s.maxPasses < 1 || s.maxPasses > MaxRetrimPasses {
			c.Errorf("max_passes", "expected 1 to %d passes, found %d", MaxRetrimPasses, s.maxPasses)
		}
	}
	if inBounds && p.Points >= 1 && p.Points <= MaxPoints && s.maxPasses >= 1 && s.maxPasses <= MaxRetrimPasses {
		if n := s.maxPasses * p.Points * p.Readings; n > MaxSweepReadings {
			c.Errorf("", "expected at most %d readings in a re-trim: %d passes × %d levels × %d readings is %d", MaxSweepReadings, s.maxPasses, p.Points, p.Readings, n)
		} else if t := time.Duration(s.maxPasses) * sweepTime(p); t > MaxSweepTime {
			c.Errorf("", "expected a re-trim of at most %s: %d passes × %d levels × (settle %s + %d readings × %g PLC at 50 Hz) is %s",
				MaxSweepTime, s.maxPasses, p.Points, p.Settle, p.Readings, p.MeterSet.NPLC, t.Round(time.Second))
		}
	}
	s.plan = p

	dacOK := false
	if s.DAC == "" {
		c.Errorf("", "missing required key \"dac\" (the trim DAC to re-trim, one of dacs:)")
	} else if d, ok := dacNamed(c, "dac", s.DAC); ok {
		s.dac, dacOK = d, true
		c.Use(s.dac.Port, DUTPort)
	}
	if dacOK {
		if pivot, ok := s.earlierTrim(c); ok {
			s.pivot = pivot
			s.nominal = nominalStep(s.dac, seq, p.List, pivot)
			if s.nominal == 0 && len(p.List) > 0 {
				c.Errorf("levels", "the gain DAC %q does not move the output at these levels (their ideal outputs average to the trim's pivot %s): choose levels away from it", s.dac.Name, fmtV(pivot))
			}
		}
	}
	s.checkWithin(c)

	for _, what := range orderedKeys(c, "results", s.Results, nil) {
		if _, ok := retrimOutputs[what]; !ok {
			c.Errorf("results."+what, "unknown retrim result %q (expected one of %s)", what, keysText(retrimOutputs))
			continue
		}
		name := s.Results[what]
		d := ResultDef{Name: name, Quantity: what, About: s.DAC + " re-trim: " + retrimOutputs[what]}
		switch what {
		case "code":
			d.Dim, d.Stage, d.Quantity = units.Count, Adjustment, "code"
			if dacOK {
				d.Range = codeRange(s.dac)
			}
		case "error":
			d.Dim = seq.ResponseDim
			d.Range = s.errorRange
		case "passes":
			d.Dim, d.Stage = units.Number, Adjustment
			hi := float64(s.maxPasses)
			d.Range = func(*Sequence) (float64, float64, bool) { return 1, hi, true }
		}
		c.Declare("results."+what, d)
		if s.outs == nil {
			s.outs = map[string]string{}
		}
		s.outs[what] = name
	}
}

// errorRange is where the error can physically be, for lint: the readable
// output less the mean ideal output at the levels.
func (s *retrimStep) errorRange(seq *Sequence) (lo, hi float64, ok bool) {
	if lo, hi, ok = outputSpan(seq); !ok || len(s.plan.List) == 0 {
		return 0, 0, false
	}
	var y float64
	for _, x := range s.plan.List {
		y += seq.IdealGain*x + seq.IdealOffset
	}
	y /= float64(len(s.plan.List))
	return lo - y, hi - y, true
}

// earlierTrim finds the earlier trim (or retrim) of the step's DAC: a re-trim
// starts from the code it wrote. It returns the trim's pivot (for a gain DAC's
// sensitivity), or reports at dac that there is none.
func (s *retrimStep) earlierTrim(c *Checker) (pivot float64, ok bool) {
	for i := len(c.earlier) - 1; i >= 0; i-- {
		switch st := c.earlier[i].Step.(type) {
		case *trimStep:
			if slicesContainsDAC(st.plan.DACs, s.dac.Name) {
				return st.plan.Pivot, true
			}
		case *retrimStep:
			if st.dac.Name == s.dac.Name && st.nominal != 0 {
				return st.pivot, true
			}
		}
	}
	c.Errorf("dac", "no earlier trim step writes DAC %q: a re-trim starts from the code a trim wrote (add a trim step with dacs: [%s] before this step)", s.dac.Name, s.dac.Name)
	return 0, false
}

// checkWithin reads the bound: "0.5 LSB" (of the DAC's nominal output step) or
// a value in the response's unit such as "6 uV".
func (s *retrimStep) checkWithin(c *Checker) {
	seq := c.Sequence()
	if s.Within == "" {
		c.Errorf("", "missing required key \"within\" (the output error the re-trim stops at: in LSB of the DAC, e.g. 0.5 LSB, or a voltage, e.g. 6 uV)")
		return
	}
	q, err := units.Parse(s.Within)
	switch {
	case err != nil:
		c.Errorf("within", "%v", err)
		return
	case q.Dim == units.Count && strings.Contains(s.Within, "LSB"):
		s.bound = q.Value * math.Abs(s.nominal)
	case q.Dim == seq.ResponseDim:
		s.bound = q.Value
	default:
		c.Errorf("within", "%q: expected a bound in LSB of the DAC's output step (e.g. 0.5 LSB) or a %s, the response's unit (e.g. %s)", s.Within, seq.ResponseDim, oneStep(seq.ResponseDim))
		return
	}
	if !(q.Value > 0) {
		c.Errorf("within", "expected a positive bound, found %q", s.Within)
	}
}

// nominalStep is the output change per code of d at levels (the response's unit
// per code, signed): its LSB at the output; an input-referred LSB times the ideal
// gain, as the trim model has it; for a gain DAC the fraction per code of the ideal output's
// distance from the pivot, averaged over the levels.
func nominalStep(d DAC, seq *Sequence, levels []float64, pivot float64) float64 {
	switch {
	case d.Adjusts == AdjustGain:
		if len(levels) == 0 {
			return 0
		}
		var sum float64
		for _, x := range levels {
			sum += seq.IdealGain*x + seq.IdealOffset - pivot
		}
		return d.LSB * sum / float64(len(levels))
	case d.BeforeGain:
		return d.LSB * seq.IdealGain
	}
	return d.LSB
}

// Stimuli are the step's levels on its source.
func (s *retrimStep) Stimuli() []Stimulus { return s.plan.stimuli() }

// Least is one level of one pass: its settle and its readings at the step's
// integration time on the slower, 50 Hz, line.
func (s *retrimStep) Least() time.Duration {
	return s.plan.pointTime()
}

// Budget is the longest the re-trim can take: every pass measured, each at every
// level; and its readings.
func (s *retrimStep) Budget() (time.Duration, int) {
	n := s.maxPasses * len(s.plan.List)
	return time.Duration(n) * s.Least(), n * s.plan.Readings
}

// retrimTry is one code tried and the output error measured with it, in the
// response's unit.
type retrimTry struct {
	code int
	err  float64
}

// retrimLoop chooses a re-trim's codes. It is pure arithmetic over the codes
// tried and their errors: the bench, the replay and the tests drive it alike.
type retrimLoop struct {
	nominal float64 // nominal output change per code, response's unit, signed
	bound   float64 // |error| within which the loop stops, response's unit
	lo, hi  int     // the DAC's code range
	tried   []retrimTry
}

// retrimChoice is what the loop makes of one pass.
type retrimChoice struct {
	sens     float64 // response's unit per code used (or that would be used) to choose the next code
	measured bool    // sens is the measured secant, not the nominal step
	within   bool    // |error| ≤ bound
	next     int     // the code to try next (= the code when within or stuck)
	stuck    bool    // no untried code is left to try: stop without meeting the bound
}

// add takes the error measured with code and chooses the next code: code −
// round(error/sensitivity), clamped to the range; a code already tried gives way
// to the untried neighbour of the best code tried, on the side that reduces its
// error.
func (l *retrimLoop) add(code int, e float64) retrimChoice {
	l.tried = append(l.tried, retrimTry{code, e})
	ch := retrimChoice{next: code}
	ch.sens, ch.measured = l.sensitivity()
	if math.Abs(e) <= l.bound {
		ch.within = true
		return ch
	}
	next := code - int(math.Round(e/ch.sens))
	next = min(max(next, l.lo), l.hi)
	if l.triedCode(next) {
		b := l.best()
		dir := 1
		if (b.err > 0) == (l.nominal > 0) {
			dir = -1
		}
		next = b.code + dir
		if next < l.lo || next > l.hi || l.triedCode(next) {
			ch.stuck = true
			return ch
		}
	}
	ch.next = next
	return ch
}

// sensitivity is the secant between the last code tried and the latest other
// code before it, when that is plausible (the nominal step's sign, 0.25 to 4
// times its size); else the nominal step.
func (l *retrimLoop) sensitivity() (float64, bool) {
	n := len(l.tried)
	last := l.tried[n-1]
	for i := n - 2; i >= 0; i-- {
		p := l.tried[i]
		if p.code == last.code {
			continue
		}
		s := (last.err - p.err) / float64(last.code-p.code)
		if r := s / l.nominal; r >= 0.25 && r <= 4 {
			return s, true
		}
		break
	}
	return l.nominal, false
}

func (l *retrimLoop) triedCode(c int) bool {
	for _, t := range l.tried {
		if t.code == c {
			return true
		}
	}
	return false
}

// best is the code tried with the smallest |error|, the first on a tie.
func (l *retrimLoop) best() retrimTry {
	b := l.tried[0]
	for _, t := range l.tried[1:] {
		if math.Abs(t.err) < math.Abs(b.err) {
			b = t
		}
	}
	return b
}

// retrimPass is what one measured pass gives: the error with its standard
// uncertainty and degrees of freedom (the pass's sweep is in the record).
type retrimPass struct {
	err, u, dof float64
}

func (s *retrimStep) Run(ctx context.Context, u *Unit) error {
	if u.Predicting() {
		s.predict(u)
		return nil
	}
	name, d := u.step.Name, u.onChannel(s.dac)
	var stored []RetrimPass
	if u.Replaying() {
		for _, p := range u.stored.Retrims {
			if p.Step == name && p.DAC == d.Name && p.Channel == u.Channel() {
				stored = append(stored, p)
			}
		}
	}
	code, known := u.Code(d.Name)
	switch {
	case u.Replaying() && len(stored) > 0:
		code, known = stored[0].Code, true // the code the DAC held is a fact of the run
	case !known && u.Live():
		err := u.Do(ctx, func(ctx context.Context) error {
			var err error
			code, err = u.e.readCode(ctx, d)
			return err
		})
		if err != nil {
			return err
		}
	case !known:
		u.End("") // the recorded run ended before this step
		return nil
	}

	loop := &retrimLoop{nominal: s.nominal, bound: s.bound, lo: d.MinCode(), hi: d.MaxCode()}
	measured := map[int]retrimPass{} // by code: the latest pass with it
	wrote := false
	var last retrimChoice
	var pass int
	for pass = 1; pass <= s.maxPasses; pass++ {
		if u.Replaying() && pass <= len(stored) {
			code = stored[pass-1].Code
		}
		m, ok, err := s.measurePass(ctx, u, pass)
		if err != nil {
			return err
		}
		if !ok {
			// The recorded run ended before this pass's readings (before the
			// step, or by a fault in it): so does the replay, with the passes
			// it had, and no result of this step.
			u.End("")
			return nil
		}
		measured[code] = m
		last = loop.add(code, m.err)
		rp := RetrimPass{Step: name, DAC: d.Name, Channel: u.Channel(), Pass: pass, Code: code, Error: m.err, ErrorU: m.u,
			Sensitivity: last.sens, Measured: last.measured, Within: last.within, Next: last.next}
		u.Rec.Retrims = append(u.Rec.Retrims, rp)
		if last.within || last.stuck || pass == s.maxPasses {
			break
		}
		if err := s.write(ctx, u, last.next); err != nil {
			return err
		}
		wrote, code = true, last.next
	}
	// pass is now the number of passes measured.

	final := retrimTry{code: code, err: measured[code].err}
	if !last.within { // the passes ran out, or no untried code was left: the best code tried
		if b := loop.best(); b.code != code {
			if err := s.write(ctx, u, b.code); err != nil {
				return err
			}
			wrote, final = true, b
		}
		u.Rec.Retrims[len(u.Rec.Retrims)-1].Next = final.code
		if _, judged := s.outs["error"]; !judged {
			passes := "passes"
			if pass == 1 {
				passes = "pass"
			}
			u.Fail(fmt.Sprintf("re-trim of %s: best error %s after %d %s, bound %s", d.Name, fmtResponse(u.seq, final.err), pass,
				passes, fmtResponse(u.seq, s.bound)))
		}
	}
	if wrote {
		t := trimEntry(u, d.Name)
		t.Code = final.code
		switch {
		case u.Live():
			t.Readback, t.Written = final.code, true
		case u.Replaying():
			if st, ok := storedTrim(u, d.Name); ok {
				t.Readback, t.Written = st.Readback, st.Written
			}
		}
	}
	m := measured[final.code]
	for what, rn := range s.outs {
		switch what {
		case "code":
			u.Set(rn, float64(final.code))
		case "error":
			u.SetU(rn, m.err, u.Unc(m.u, m.dof))
		case "passes":
			u.Set(rn, float64(pass))
		}
	}
	return nil
}

// write sets the DAC to code: on the bench through the trim's write path (written,
// read back and compared; a mismatch is a station fault); in a replay the code
// is only noted.
func (s *retrimStep) write(ctx context.Context, u *Unit, code int) error {
	if u.Live() {
		if err := u.e.writeCode(ctx, u.onChannel(s.dac), code); err != nil {
			return err
		}
	}
	u.SetCode(s.dac.Name, code)
	return nil
}

// passName is the name of the sweep that keeps pass i's readings.
func passName(step string, i int) string { return fmt.Sprintf("%s pass %d", step, i) }

// measurePass measures pass i at every level (on the bench, or from the stored
// record in a replay), records it as a sweep and returns its error. ok is false
// when a replayed record has no such pass.
func (s *retrimStep) measurePass(ctx context.Context, u *Unit, i int) (retrimPass, bool, error) {
	name := passName(u.step.Name, i)
	sw, ok, err := takeSweep(ctx, u, name, s.plan, Adjustment)
	if !ok {
		return retrimPass{}, false, err
	}
	for _, p := range sw.Points {
		if p.Valid != len(p.Readings) || p.Valid == 0 {
			// The bench faults on an invalid reading before this; a record that
			// holds one cannot be re-trimmed from.
			return retrimPass{}, false, u.Fault("%s: invalid reading (%s) at %s", name, firstBad(p.Readings), fmtStim(s.plan.Stimulus, p.Stimulus))
		}
	}
	var m retrimPass
	m.err, m.u, m.dof = passError(u.cfg, s.plan, sw)
	return m, true, nil
}

// passError is the mean output error of a pass, mean over its levels of (mean
// reading − ideal output), in the response's unit, with its standard uncertainty
// and degrees of freedom. As for a measure step's error: the readings' scatter (the pooled SD
// over √(n·L), Σ(n − 1) degrees of freedom), the meter's spec at each reading and
// the source's at each level through the ideal gain, and half a count of the
// meter's resolution, each rectangular (JCGM 100 §4.3.7). The specs are the same
// instruments' at every level, so they are taken as fully correlated: averaged,
// not combined in quadrature. Each level's specs are those of the range its
// reading and level were taken on (specs).
func passError(cfg Config, plan SweepPlan, sw Sweep) (e, std, dof float64) {
	seq := cfg.Sequence
	L := float64(len(sw.Points))
	var sumE, ua2, mw, sw2, res float64
	for _, p := range sw.Points {
		meter, source, r := specs(cfg.Station, plan, p.Mean, p.Stimulus)
		res = math.Max(res, r) // the coarsest count of the ranges used
		sumE += p.Mean - (seq.IdealGain*p.Stimulus + seq.IdealOffset)
		ua2 += p.URandom * p.URandom
		mw += meter.HalfWidth(p.Mean)
		sw2 += math.Abs(seq.IdealGain) * source.HalfWidth(p.Stimulus)
	}
	_, pdof := pooledSD(sw.Points)
	if pdof == 0 {
		pdof = math.Inf(1)
	}
	std, dof = uncertainty.Combine([]uncertainty.Component{
		{Name: "repeatability", U: math.Sqrt(ua2) / L, DOF: pdof, Kind: uncertainty.KindA},
		uncertainty.Rectangular("meter", mw/L),
		uncertainty.Resolution("resolution", res),
		uncertainty.Rectangular("source", sw2/L),
	})
	return sumE / L, std, dof
}

// predict is the step on paper: one pass on a unit with exactly the ideal
// transfer and one noiseless reading a level, so the error is 0 and its
// uncertainty the instruments' specs alone. No pass is recorded.
func (s *retrimStep) predict(u *Unit) {
	sw := idealSweep(u.seq, passName(u.step.Name, 1), s.plan.List)
	sw.Stage = Adjustment
	annotate(u.cfg, s.plan, &sw)
	e, std, dof := passError(u.cfg, s.plan, sw)
	code, ok := u.Code(s.dac.Name)
	if !ok {
		code = s.dac.NoCorrection
	}
	for what, rn := range s.outs {
		switch what {
		case "code":
			u.Set(rn, float64(code))
		case "error":
			u.SetU(rn, e, u.Unc(std, dof))
		case "passes":
			u.Set(rn, 1)
		}
	}
}
