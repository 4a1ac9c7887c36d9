package sequencer

// The trim steps: clear_trim (record what the trim DACs hold, then write their
// no-correction codes), trim (compute the codes from a fit, write them and read
// them back) and store (commit them to non-volatile memory).

import (
	"context"
	"fmt"
	"math"
	"strings"

	"trimline/instruments/units"
)

func init() {
	RegisterStep(StepKind{Name: "clear_trim", PerChannel: true, About: "reads the code each trim DAC and the value each firmware coefficient holds (recorded as found) and writes their no-correction values",
		New: func() Step { return new(clearTrimStep) }})
	RegisterStep(StepKind{Name: "trim", PerChannel: true, About: "computes trim codes from an earlier fit, writes them and reads them back; a code outside a DAC's range fails the unit",
		New: func() Step { return new(trimStep) }})
	RegisterStep(StepKind{Name: "store", About: "sends the command that commits the written trim codes to the unit's non-volatile memory",
		New: func() Step { return new(storeStep) }})
}

// dacsOf resolves the DAC names a step lists (all of the sequence's when none),
// reporting unknown ones at key.
func dacsOf(c *Checker, key string, names []string) []DAC {
	seq := c.Sequence()
	if len(names) == 0 {
		if len(seq.DACs) == 0 {
			c.Errorf("", "the sequence declares no trim DACs (dacs:)")
		}
		return append([]DAC(nil), seq.DACs...)
	}
	var out []DAC
	for i, n := range names {
		if d, ok := dacNamed(c, fmt.Sprintf("%s[%d]", key, i), n); ok {
			out = append(out, d)
		}
	}
	return out
}

// dacNamed is the sequence's trim DAC called name, or reports at key that
// there is none, naming those the sequence declares.
func dacNamed(c *Checker, key, name string) (DAC, bool) {
	seq := c.Sequence()
	d, ok := seq.DAC(name)
	if !ok {
		var known []string
		for _, d := range seq.DACs {
			known = append(known, d.Name)
		}
		c.Errorf(key, "no trim DAC called %q (dacs: declares %s)", name, strings.Join(known, ", "))
	}
	return d, ok
}

// trimEntry returns the record's trim entry of DAC name on the running step's
// channel, adding it when new.
func trimEntry(u *Unit, name string) *TrimCode {
	rec := u.Rec
	for i := range rec.Trims {
		if rec.Trims[i].DAC == name && rec.Trims[i].Channel == u.channel {
			return &rec.Trims[i]
		}
	}
	rec.Trims = append(rec.Trims, TrimCode{DAC: name, Channel: u.channel})
	return &rec.Trims[len(rec.Trims)-1]
}

// storedTrim returns the stored record's entry of DAC name on the running step's
// channel.
func storedTrim(u *Unit, name string) (TrimCode, bool) {
	for _, t := range u.stored.Trims {
		if t.DAC == name && t.Channel == u.channel {
			return t, true
		}
	}
	return TrimCode{}, false
}

// clearTrimStep is clear_trim as the file writes it.
type clearTrimStep struct {
	DACs []string `yaml:"dacs"`
	dacs []DAC
}

func (s *clearTrimStep) Check(c *Checker) {
	seq := c.Sequence()
	if len(s.DACs) > 0 || len(seq.DACs) > 0 || len(seq.Coefficients) == 0 {
		s.dacs = dacsOf(c, "dacs", s.DACs)
	}
	for _, d := range s.dacs {
		c.Use(d.Port, DUTPort)
	}
	for _, k := range seq.Coefficients {
		c.Use(k.Port, DUTPort)
	}
}

func (s *clearTrimStep) Run(ctx context.Context, u *Unit) error {
	for _, d := range s.dacs {
		d := u.onChannel(d)
		t := trimEntry(u, d.Name)
		switch {
		case u.Live():
			err := u.Do(ctx, func(ctx context.Context) error {
				c, err := u.e.readCode(ctx, d)
				t.Before = c
				return err
			})
			if err != nil {
				return err
			}
			if err := u.e.writeCode(ctx, d, d.NoCorrection); err != nil {
				return err
			}
		case u.Replaying():
			t.Before = d.NoCorrection
			if st, ok := storedTrim(u, d.Name); ok {
				t.Before = st.Before
			}
		default:
			t.Before = d.NoCorrection
		}
		u.SetCode(d.Name, d.NoCorrection)
	}
	// Every firmware coefficient too: the unit measured next is the uncorrected one.
	return clearCoefficients(ctx, u)
}

// trimStep is trim as the file writes it.
type trimStep struct {
	Fit     string            `yaml:"fit"`
	DACs    []string          `yaml:"dacs"`
	Pivot   *units.Quantity   `yaml:"pivot"`
	Results map[string]string `yaml:"results"`
	// Offset is the offset the trim brings to the ideal: "line" (the default:
	// the best-fit line's output at zero input) or "terminal" (the output
	// measured at zero input).
	Offset string `yaml:"offset"`

	order []string // the order of Results' keys when not read from a file
	plan  TrimPlan
	names []string // result name of each plan DAC
	// atFit names the steps before the fit's sweep that write coefficients
	// (clear_trim, coefficients): their last words are the correction the fit
	// was measured under. Empty when none; nil when the sweep is not found.
	atFit map[string]bool
}

func (s *trimStep) Check(c *Checker) {
	c.SetStage(Adjustment)
	if s.Fit == "" {
		c.Errorf("", "missing required key \"fit\" (the name of an earlier fit step whose line the codes correct)")
	} else if d := c.Earlier("fit", s.Fit, "fit"); d != nil {
		s.atFit = coefStepsBefore(c, d)
		checkOffsetChoice(c, &s.Offset, d)
	} else {
		checkOffsetChoice(c, &s.Offset, nil)
	}
	s.plan = TrimPlan{DACs: dacsOf(c, "dacs", s.DACs), Pivot: c.Sequence().IdealOffset}
	if q := s.Pivot; q != nil {
		if d := c.Sequence().ResponseDim; q.Dim != d {
			c.Errorf("pivot", "expected an output in the response's unit (a %s, e.g. %s), found a %s", d, responseExample(d), q.Dim)
		}
		s.plan.Pivot = q.Value
	}
	s.names = make([]string, len(s.plan.DACs))
	for i, d := range s.plan.DACs {
		c.Use(d.Port, DUTPort)
		s.names[i] = d.Name + "_code"
		if n, ok := s.Results[d.Name]; ok {
			s.names[i] = n
		}
	}
	for k := range s.Results {
		if !slicesContainsDAC(s.plan.DACs, k) {
			c.Errorf("results."+k, "no trim DAC %q in this trim: results maps a DAC's name to its code's result name", k)
		}
	}
	// Declared in the file's order of results:, then the DACs it does not name.
	order := orderedKeys(c, "results", s.Results, s.order)
	for _, d := range s.plan.DACs {
		if _, ok := s.Results[d.Name]; !ok {
			order = append(order, d.Name)
		}
	}
	for _, name := range order {
		for i, d := range s.plan.DACs {
			if d.Name == name {
				c.Declare("results."+name, ResultDef{Name: s.names[i], Dim: units.Count, Stage: Adjustment, Quantity: "code",
					About: d.Name + " trim code written", Range: codeRange(d)})
			}
		}
	}
}

// coefStepsBefore names the steps that write coefficients before the sweep of
// fit, or returns nil when that sweep is not an earlier step (the fit reports it).
func coefStepsBefore(c *Checker, fit *StepDecl) map[string]bool {
	fs, ok := fit.Step.(*fitStep)
	if !ok {
		return nil
	}
	out := map[string]bool{}
	for _, d := range c.earlier {
		if d.Name == fs.Sweep {
			return out
		}
		if d.Kind == "clear_trim" || d.Kind == "coefficients" {
			out[d.Name] = true
		}
	}
	return nil
}

func slicesContainsDAC(ds []DAC, name string) bool {
	for _, d := range ds {
		if d.Name == name {
			return true
		}
	}
	return false
}

func (s *trimStep) Run(ctx context.Context, u *Unit) error {
	fk, ok := u.Kept(s.Fit).(fitKept)
	if !ok {
		u.End(fmt.Sprintf("not measured: fit %q was not made", s.Fit))
		return nil
	}
	seq := u.seq
	dacs := make([]DAC, len(s.plan.DACs))
	for i, d := range s.plan.DACs {
		dacs[i] = u.onChannel(d)
	}
	before := make([]int, len(dacs))
	for i, d := range dacs {
		t := trimEntry(u, d.Name)
		c, known := u.Code(d.Name)
		switch {
		case known:
		case u.Live():
			err := u.Do(ctx, func(ctx context.Context) error {
				var err error
				c, err = u.e.readCode(ctx, d)
				return err
			})
			if err != nil {
				return err
			}
			t.Before = c
		case u.Replaying():
			c = d.NoCorrection
			if st, ok := storedTrim(u, d.Name); ok {
				c = st.Before
			}
			t.Before = c
		default:
			c = d.NoCorrection
			t.Before = c
		}
		before[i] = c
	}
	// The unit's firmware corrects the output, corrected = k·raw + m, and a DAC
	// moves the raw output (its corrected step is k·LSB). The trim solves on the
	// raw line: the fit's line under the correction its sweep was measured with,
	// brought to the ideal under the correction the unit holds now.
	//
	// With offset: terminal the line is moved to pass through the output
	// measured at zero input, with the fit's slope: the offset codes then
	// bring that output, not the line's intercept, to the ideal offset.
	kf, mf := coefInEffect(u, s.atFit)
	k, m := coefInEffect(u, nil)
	y0, u0, err := fk.offsetAt(s.Offset)
	var sol TrimSolution
	if err == nil {
		sol, err = ComputeTrim(s.plan, fk.a.sum.Slope/kf, (y0-mf)/kf, before, seq.IdealGain/k, (seq.IdealOffset-m)/k)
	}
	if err != nil {
		u.Fail("cannot compute trim codes: " + err.Error())
		u.End("cannot compute trim: " + err.Error())
		return nil
	}
	idealU := idealCodeU(s.plan, fk.a, sol, before, u0)
	for i, d := range s.plan.DACs {
		idealU[i] = codeUOnRawLine(d, idealU[i], kf)
	}
	var sat []string
	for i, d := range dacs {
		t, c := trimEntry(u, d.Name), sol.Codes[i]
		t.Ideal, t.Code, t.Saturated, t.IdealU = c.Ideal, c.Code, c.Saturated, idealU[i]
		if d.Adjusts == AdjustOffset && s.Offset == OffsetTerminal {
			t.Offset = OffsetTerminal
		}
		if c.Saturated {
			sat = append(sat, fmt.Sprintf("%s%s trim needs code %.1f, outside the DAC's range %d..%d", onChannelText(u), d.Name, c.Ideal, d.MinCode(), d.MaxCode()))
			u.res.flagged(u.key(s.names[i]), float64(c.Code), d.Name+" trim saturated")
		} else {
			u.Set(s.names[i], float64(c.Code))
		}
	}
	if len(sat) > 0 {
		for _, r := range sat {
			u.Fail(r)
		}
		u.End("not measured: trim saturated")
		return nil
	}
	for i, d := range dacs {
		t := trimEntry(u, d.Name)
		switch {
		case u.Live():
			if err := u.e.writeCode(ctx, d, t.Code); err != nil {
				return err
			}
			t.Readback, t.Written = t.Code, true
		case u.Replaying():
			// What the unit did with the codes is a fact of the run, not a computation.
			if st, ok := storedTrim(u, d.Name); ok {
				t.Readback, t.Stored, t.Written = st.Readback, st.Stored, st.Written
			}
		}
		u.SetCode(d.Name, sol.Codes[i].Code)
	}
	return nil
}

// codeUOnRawLine is the standard uncertainty of DAC d's ideal code, u in codes as
// idealCodeU gives it from the corrected line, when the fit was measured under a
// firmware gain kf. An offset DAC at the output follows the raw intercept,
// (b − m)/kf: its code's uncertainty is u/|kf|. For a gain DAC and an offset DAC
// before the gain, the code is a ratio of the corrected line's parameters, in
// which kf cancels: u as it is.
func codeUOnRawLine(d DAC, u, kf float64) float64 {
	if d.Adjusts != AdjustGain && !d.BeforeGain {
		return u / math.Abs(kf)
	}
	return u
}

// coefInEffect is the firmware correction the unit applies on the running
// step's channel, corrected = k·raw + m (m in the response's SI unit): the last
// value encoded for each coefficient by clear_trim or a coefficients step (a
// failed encoding or write ends the run first), else no correction (k = 1, m = 0).
// With only non-nil, just the writes of the steps it names count: the correction
// in effect at an earlier point of the run.
func coefInEffect(u *Unit, only map[string]bool) (k, m float64) {
	k = 1
	for _, w := range u.Rec.Coefficients {
		if w.Channel != u.Channel() || w.Text == "" || (only != nil && !only[w.Step]) {
			continue
		}
		c, ok := u.seq.Coefficient(w.Adjusts)
		if !ok || c.Name != w.Name {
			continue
		}
		switch w.Adjusts {
		case AdjustGain:
			k = w.Value
		case AdjustOffset:
			m = w.Value * c.UnitSI
		}
	}
	return k, m
}

// idealCodeU propagates the fit's uncertainty to the exact codes, to first order:
// a gain code depends on the slope, an offset code on the intercept. The result is
// in codes, one per plan DAC.
//
// u0 is the standard uncertainty of the output at zero input the offset codes
// were solved for (the fit's intercept's, or the terminal point's).
func idealCodeU(t TrimPlan, a analysis, sol TrimSolution, before []int, u0 float64) []float64 {
	cov := a.cov()
	u1 := math.Sqrt(cov[1][1])
	slope := a.sum.Slope
	gains, _ := t.byStep()
	g0, g1 := 1.0, 1.0
	coarser := make([]float64, len(t.DACs)) // the rounded factor of the gain DACs solved before each
	for k, i := range gains {
		coarser[i] = g1
		if k == 0 {
			g0, g1 = gainFactor(t.DACs[i], float64(before[i])), gainFactor(t.DACs[i], float64(sol.Codes[i].Code))
		} else {
			g0 *= gainFactor(t.DACs[i], float64(before[i]))
			g1 *= gainFactor(t.DACs[i], float64(sol.Codes[i].Code))
		}
	}
	out := make([]float64, len(t.DACs))
	for i, d := range t.DACs {
		switch {
		case d.Adjusts == AdjustGain:
			// code = N + (G·g0/(a·c) − 1)/LSB with c the coarser DACs' factor, so
			// ∂code/∂a = −G·g0/(a²·c·LSB); G·g0/a is the factor the trim asks for,
			// ≈ g1 after trim: |∂code/∂a| ≈ g1/(a·c·LSB).
			out[i] = u1 * (slope * g1 / coarser[i]) / (slope * slope * d.LSB)
		case d.BeforeGain:
			out[i] = u0 / (g0 * (slope / g0) * d.LSB)
		default:
			out[i] = u0 * g1 / (g0 * d.LSB)
		}
		out[i] = math.Abs(out[i])
	}
	return out
}

// storeStep is store as the file writes it.
type storeStep struct {
	Command string `yaml:"command"`
	Port    string `yaml:"port"`
}

func (s *storeStep) Check(c *Checker) {
	if s.Command == "" {
		c.Errorf("", "missing required key \"command\" (what commits the trim codes to non-volatile memory, e.g. \"NV STORE\")")
	}
	s.Port = orDefault(s.Port, RoleDUT)
	c.Use(s.Port, DUTPort)
	c.SetStage(Adjustment) // committing the codes is part of the adjustment
}

func (s *storeStep) Run(ctx context.Context, u *Unit) error {
	if !u.Live() {
		return nil // replay takes Stored from the record with the codes
	}
	port, err := u.Port(s.Port)
	if err != nil {
		return err
	}
	if err := u.Do(ctx, func(ctx context.Context) error { return u.e.blame(s.Port, "", port.Command(ctx, s.Command)) }); err != nil {
		return fmt.Errorf("%s: store trim codes: %w", s.Port, err)
	}
	for i := range u.Rec.Trims {
		if u.Rec.Trims[i].Written {
			u.Rec.Trims[i].Stored = true
		}
	}
	storeCoefficients(u.Rec)
	return nil
}

// writeCode writes code to the DAC d under the step deadline and reads it back; a
// read-back that differs stops the run as a station fault.
func (e *Engine) writeCode(ctx context.Context, d DAC, code int) error {
	return e.step(ctx, func(ctx context.Context) error {
		port := e.ports[d.Port]
		if err := port.Command(ctx, d.Line(code)); err != nil {
			return e.blame(d.Port, err.Error(), fmt.Errorf("%s: write %s trim code %d: %w", d.Port, d.Name, code, err))
		}
		got, err := e.readCode(ctx, d)
		if err != nil {
			return err
		}
		if got != code {
			return e.blame(d.Port, fmt.Sprintf("read back %d after %d was written", got, code),
				&stop{verdict: Fault, msg: fmt.Sprintf("%s: %s trim read back %d after writing %d", d.Port, d.Name, got, code)})
		}
		return nil
	})
}

// readCode reads the code the DAC d holds; a reply that is not a code stops the run
// as a station fault.
func (e *Engine) readCode(ctx context.Context, d DAC) (int, error) {
	reply, err := e.ports[d.Port].Query(ctx, d.Read)
	if err != nil {
		return 0, e.blame(d.Port, err.Error(), fmt.Errorf("%s: read %s trim code: %w", d.Port, d.Name, err))
	}
	c, err := d.ParseWord(reply)
	if err != nil {
		return 0, e.blame(d.Port, fmt.Sprintf("%q, which is not a code", reply),
			&stop{verdict: Fault, msg: fmt.Sprintf("%s: %s trim read-back %q is not a code", d.Port, d.Name, reply)})
	}
	return c, nil
}

// onChannelText is "channel 2: " in a step that runs per channel, else "".
func onChannelText(u *Unit) string {
	if u.channel == "" {
		return ""
	}
	return "channel " + u.channel + ": "
}
