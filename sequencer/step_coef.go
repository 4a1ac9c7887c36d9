package sequencer

// The coefficients step: the firmware correction coefficients that bring an
// earlier fit's line (of the unit with no correction) to the ideal transfer,
// encoded in their number formats, written, read back and recorded.

import (
	"context"
	"fmt"
	"math"

	"trimline/instruments/units"
	"trimline/sequencer/uncertainty"
)

func init() {
	RegisterStep(StepKind{Name: "coefficients", PerChannel: true, About: "computes the firmware gain and offset correction from an earlier fit of the uncorrected unit, writes each coefficient in its number format and reads it back",
		New: func() Step { return new(coefStep) }})
}

// coefStep is coefficients as the file writes it.
type coefStep struct {
	Fit     string            `yaml:"fit"`
	Results map[string]string `yaml:"results"`
	// Offset is the offset the offset coefficient brings to the ideal: "line"
	// (the default: the best-fit line's output at zero input) or "terminal"
	// (the output measured at zero input).
	Offset string `yaml:"offset"`

	order []string      // the order of Results' keys when not read from a file
	coefs []Coefficient // the sequence's, gain first
}

func (s *coefStep) Check(c *Checker) {
	c.SetStage(Adjustment)
	seq := c.Sequence()
	if len(seq.Coefficients) == 0 {
		c.Errorf("", "the sequence declares no firmware coefficients (coefficients:)")
	}
	s.coefs = nil
	for _, what := range []string{AdjustGain, AdjustOffset} {
		if k, ok := seq.Coefficient(what); ok {
			s.coefs = append(s.coefs, k)
			c.Use(k.Port, DUTPort)
		}
	}
	if s.Fit == "" {
		c.Errorf("", "missing required key \"fit\" (the name of an earlier fit step of the unit with no correction)")
	} else if d := c.Earlier("fit", s.Fit, "fit"); d != nil {
		s.checkUncorrected(c, d)
		checkOffsetChoice(c, &s.Offset, d)
	} else {
		checkOffsetChoice(c, &s.Offset, nil)
	}
	for _, what := range orderedKeys(c, "results", s.Results, s.order) {
		k, ok := seq.Coefficient(what)
		switch {
		case what != AdjustGain && what != AdjustOffset:
			c.Errorf("results."+what, "unknown coefficients result %q (expected gain or offset: the value written to that coefficient)", what)
			continue
		case !ok:
			c.Errorf("results."+what, "no coefficient adjusts %s (coefficients: declares none)", what)
			continue
		}
		def := ResultDef{Name: s.Results[what], Dim: coefDim(seq, k), Stage: Adjustment, Quantity: what + "_coefficient",
			About: coefAbout(seq, k), Range: coefRange(k)}
		c.Declare("results."+what, def)
	}
}

// checkUncorrected reports a fit that is not of the unit with no correction: its
// sweep must come after a clear_trim step, with no coefficients step between.
func (s *coefStep) checkUncorrected(c *Checker, fit *StepDecl) {
	fs, ok := fit.Step.(*fitStep)
	if !ok || fs.Sweep == "" {
		return
	}
	sweep := -1
	for i, d := range c.earlier {
		if d.Name == fs.Sweep {
			sweep = i
		}
	}
	if sweep < 0 {
		return // the fit step reports it
	}
	for i := sweep - 1; i >= 0; i-- {
		switch d := c.earlier[i]; d.Kind {
		case "clear_trim":
			return
		case "coefficients":
			c.Errorf("fit", "fit %q is of sweep %q, made after step %q wrote coefficients: the coefficients are computed from the unit with no correction (put a clear_trim step before the sweep)", s.Fit, fs.Sweep, d.Name)
			return
		}
	}
	c.Errorf("fit", "fit %q is of sweep %q, which no clear_trim step precedes: the coefficients are computed from the unit with no correction (put a clear_trim step before the sweep)", s.Fit, fs.Sweep)
}

// coefDim is the dimension of coefficient k's result: a plain number for a gain
// factor, the response's for an offset.
func coefDim(seq *Sequence, k Coefficient) units.Dim {
	if k.Adjusts == AdjustGain {
		return units.Number
	}
	return seq.ResponseDim
}

func coefAbout(seq *Sequence, k Coefficient) string {
	if k.Adjusts == AdjustGain {
		return k.Name + " gain coefficient written, a factor"
	}
	return k.Name + " offset coefficient written, " + unitOf(seq.ResponseDim)
}

// coefRange is the format's range of coefficient k, in the unit of its result.
func coefRange(k Coefficient) func(*Sequence) (float64, float64, bool) {
	return func(*Sequence) (float64, float64, bool) {
		if k.Format.Kind == 0 {
			return 0, 0, false
		}
		lo, hi := k.Format.Range()
		return lo * k.UnitSI, hi * k.UnitSI, true
	}
}

// CoefficientPlan is the arithmetic of the coefficients step, apart from I/O: the
// unit computes corrected = k·raw + m.
type CoefficientPlan struct {
	Gain, Offset bool // which coefficients the unit has
}

// CoefficientValues are the exact coefficients one fit asks for and their
// sensitivities to the fit's (intercept, slope), for the law of propagation.
type CoefficientValues struct {
	K, M   float64    // gain factor; offset in the response unit (SI)
	DK, DM [2]float64 // ∂k and ∂m by (intercept, slope)
}

// Values returns the coefficients that bring a unit measured with no correction,
// slope s and intercept c (response at zero stimulus), to the ideal gain G and
// offset Y0: k = G/s and m = Y0 − k·c. With no gain coefficient k = 1 (m = Y0 − c);
// with no offset coefficient m is still returned but not written. It is pure
// arithmetic; a non-finite fit, or with a gain coefficient a zero or wrong-sign
// slope, is an error.
func (p CoefficientPlan) Values(s, c, G, Y0 float64) (CoefficientValues, error) {
	if !finite(s) || !finite(c) {
		return CoefficientValues{}, fmt.Errorf("fit is not finite (slope %g, intercept %g)", s, c)
	}
	if !p.Gain {
		return CoefficientValues{K: 1, M: Y0 - c, DM: [2]float64{-1, 0}}, nil
	}
	if s == 0 || math.Signbit(s) != math.Signbit(G) {
		return CoefficientValues{}, fmt.Errorf("measured gain %.6g has the wrong sign or is zero: the output does not follow the input", s)
	}
	k := G / s
	return CoefficientValues{K: k, M: Y0 - k*c,
		DK: [2]float64{0, -G / (s * s)},
		DM: [2]float64{-k, G * c / (s * s)}}, nil
}

func (s *coefStep) Run(ctx context.Context, u *Unit) error {
	fk, ok := u.Kept(s.Fit).(fitKept)
	if !ok {
		u.End(fmt.Sprintf("not measured: fit %q was not made", s.Fit))
		return nil
	}
	seq := u.seq
	_, hasGain := seq.Coefficient(AdjustGain)
	_, hasOffset := seq.Coefficient(AdjustOffset)
	plan := CoefficientPlan{Gain: hasGain, Offset: hasOffset}
	// With offset: terminal, c is the output measured at zero input: the
	// corrected output there is then the ideal offset.
	y0, u0, err := fk.offsetAt(s.Offset)
	var vals CoefficientValues
	if err == nil {
		vals, err = plan.Values(fk.a.sum.Slope, y0, seq.IdealGain, seq.IdealOffset)
	}
	if err != nil {
		u.Fail("cannot compute coefficients: " + err.Error())
		u.End("cannot compute coefficients: " + err.Error())
		return nil
	}
	ideal := make([]float64, len(s.coefs))
	fitU := make([]float64, len(s.coefs))
	fitDOF := make([]float64, len(s.coefs))
	for i, k := range s.coefs {
		grad := vals.DK
		ideal[i] = vals.K
		if k.Adjusts == AdjustOffset {
			grad = [2]float64{vals.DM[0] / k.UnitSI, vals.DM[1] / k.UnitSI}
			ideal[i] = vals.M / k.UnitSI
		}
		fitU[i], fitDOF[i] = fk.a.linear(grad)
		if k.Adjusts == AdjustOffset && s.Offset == OffsetTerminal {
			fitU[i], fitDOF[i] = terminalCoefU(fk, vals, u0, k.UnitSI)
		}
	}
	return writeCoefficients(ctx, u, s.coefs, s.Results, ideal, fitU, fitDOF)
}

// terminalCoefU is the standard uncertainty and dof of the offset coefficient
// m = Y0 − k·y0 solved on the output y0 measured at zero input (u0 its
// standard uncertainty), in the coefficient's unit (unitSI per unit): to first
// order (JCGM 100 §5.1.2) u²(m) = k²·u0² + (∂m/∂s)²·u²(s), with u(s) the
// slope's from the fit. The covariance of y0 and the slope (the meter's gain
// error they share) is left out: its term is of the order of y0·u(s)/s, the
// offset times the slope's relative uncertainty, far below k·u0.
func terminalCoefU(fk fitKept, v CoefficientValues, u0, unitSI float64) (u, dof float64) {
	us, ds := fk.a.linear([2]float64{0, 1})
	d0 := fk.term.dof
	return uncertainty.Combine([]uncertainty.Component{
		{Name: "output at zero input", U: v.DM[0] * u0 / unitSI, DOF: d0},
		{Name: "slope", U: v.DM[1] * us / unitSI, DOF: ds},
	})
}

// writeCoefficients encodes ideal[i] (in coefficient i's unit, with standard
// uncertainty idealU[i] and idealDOF[i] degrees of freedom) in each coefficient's
// format, writes and reads it back on a live unit (takes the read-back from the
// stored record in a replay), records every CoefficientWrite, and sets the result
// results names for what each adjusts to the value written with its uncertainty.
// A value outside its format's range fails the unit and nothing is written; a
// read-back that is not the word written fails it too, and either ends the run.
func writeCoefficients(ctx context.Context, u *Unit, coefs []Coefficient, results map[string]string, ideal, idealU, idealDOF []float64) error {
	name := u.step.Name
	writes := make([]CoefficientWrite, len(coefs))
	var outside []string
	for i, k := range coefs {
		w := newCoefWrite(u, k)
		w.Ideal, w.IdealU = ideal[i], idealU[i]
		text, stored, err := k.Format.Encode(w.Ideal)
		if err != nil {
			lo, hi := k.Format.Range()
			unit := ""
			if k.UnitText() != "" {
				unit = " " + k.UnitText()
			}
			outside = append(outside, fmt.Sprintf("coefficient %s %s%s outside %s's range %s … %s%s", k.Name,
				units.FormatSig(w.Ideal, 6), unit, k.FormatName, units.FormatSig(lo, 6), units.FormatSig(hi, 6), unit))
			if r, ok := results[k.Adjusts]; ok {
				u.res.flagged(r, w.Ideal*k.UnitSI, "coefficient outside its format's range")
			}
		} else {
			w.Text, w.Value, w.Resolution = text, stored, k.Format.Resolution(stored)
		}
		writes[i] = w
	}
	if len(outside) > 0 {
		// Nothing is written: a unit whose correction does not fit its firmware's
		// numbers is not half corrected.
		u.Rec.Coefficients = append(u.Rec.Coefficients, writes...)
		for _, r := range outside {
			u.Fail(r)
		}
		u.End("not measured: coefficient outside its format's range")
		return nil
	}
	for i, k := range coefs {
		w := &writes[i]
		if r, ok := results[k.Adjusts]; ok {
			// The written value's uncertainty: the computed value's, and the
			// rounding to the format, rectangular within half a resolution (JCGM 100
			// §4.3.7, u = resolution/√12). The rounding stays in the corrected unit's
			// output as part of its residual error, so it is counted here once.
			std, dof := uncertainty.Combine([]uncertainty.Component{
				{Name: "computed", U: idealU[i], DOF: idealDOF[i]}, // Type A and B together, as evaluated
				uncertainty.Resolution("rounding", w.Resolution),
			})
			u.SetU(r, w.Value*k.UnitSI, u.Unc(std*k.UnitSI, dof))
		}
		switch {
		case u.Live():
			if err := coefWrite(ctx, u, k, w, false); err != nil {
				u.Rec.Coefficients = append(u.Rec.Coefficients, writes[:i+1]...)
				return err
			}
		case u.Replaying():
			if st, ok := storedCoef(u.stored, name, k.Name, u.Channel()); ok {
				w.fromStored(k, st)
			}
		}
	}
	u.Rec.Coefficients = append(u.Rec.Coefficients, writes...)
	if !u.Predicting() {
		failMismatches(u, writes)
	}
	return nil
}

// newCoefWrite is the record entry of the running step's write of k on the
// unit's channel, before any value is chosen.
func newCoefWrite(u *Unit, k Coefficient) CoefficientWrite {
	return CoefficientWrite{Step: u.step.Name, Name: k.Name, Channel: u.Channel(), Adjusts: k.Adjusts, Format: k.Format.String(), Unit: k.UnitText()}
}

// failMismatches fails the unit for each word of ws that was written and did
// not read back, and then ends the run.
func failMismatches(u *Unit, ws []CoefficientWrite) {
	failed := false
	for _, w := range ws {
		if w.Written && !w.Match {
			u.Fail(w.mismatch())
			failed = true
		}
	}
	if failed {
		u.End("not measured: a coefficient did not read back as written")
	}
}

// clearCoefficients writes every coefficient's no-correction value (gain 1,
// offset 0) after reading what the unit held, for clear_trim: each is recorded
// as a CoefficientWrite of the clear_trim step with Found set. A word that does not
// read back fails the unit and ends the run, as in the coefficients step.
func clearCoefficients(ctx context.Context, u *Unit) error {
	var ws []CoefficientWrite
	for _, k := range u.seq.Coefficients {
		w := newCoefWrite(u, k)
		w.Ideal = k.NoCorrection()
		text, stored, err := k.Format.Encode(w.Ideal)
		if err != nil { // a format that cannot hold 1 (Q1.n, a coarse int): refused at load, so a bug here
			return fmt.Errorf("coefficient %s: no correction: %w", k.Name, err)
		}
		w.Text, w.Value, w.Resolution = text, stored, k.Format.Resolution(stored)
		switch {
		case u.Live():
			err := coefWrite(ctx, u, k, &w, true)
			ws = append(ws, w)
			if err != nil {
				u.Rec.Coefficients = append(u.Rec.Coefficients, ws...)
				return err
			}
			continue
		case u.Replaying():
			if st, ok := storedCoef(u.stored, w.Step, k.Name, u.Channel()); ok {
				w.fromStored(k, st)
			}
		}
		ws = append(ws, w)
	}
	u.Rec.Coefficients = append(u.Rec.Coefficients, ws...)
	failMismatches(u, ws)
	return nil
}

// storeCoefficients marks, for a store step, the last word written to each
// coefficient (on each channel) as committed to non-volatile memory.
func storeCoefficients(rec *Record) {
	last := map[string]int{}
	for i, w := range rec.Coefficients {
		if w.Written {
			last[w.Channel+"\x00"+w.Name] = i
		}
	}
	for _, i := range last {
		rec.Coefficients[i].Stored = true
	}
}
