package sequencer

// The tempco step: the unit's offset and gain temperature coefficients from
// fits of sweeps made at known, different temperatures, written to the
// firmware's offset_tc and gain_tc coefficients (through the coefficients
// step's write/read-back) and recorded.

import (
	"context"
	"fmt"
	"math"
	"strings"

	"trimline/instruments/units"
	"trimline/sequencer/uncertainty"
)

func init() {
	RegisterStep(StepKind{Name: "tempco", PerChannel: true, About: "computes the offset and gain temperature coefficients from two or more fits at known temperatures, writes the firmware's offset_tc and gain_tc coefficients and reads them back",
		New: func() Step { return new(tempcoStep) }})
}

// ChamberUniformity is the half-width, °C, of the difference between the
// chamber's sensor and the unit's temperature that the soak's readings cannot
// see (spatial uniformity and the unit's self-heating), taken as rectangular:
// u = 0.5/√3 ≈ 0.29 °C. ±0.5 °C is the uniformity commonly specified for a
// small production temperature chamber (common practice, from memory, not from
// a measurement of this station's chamber); it counts once per temperature, as
// if independent between set points, which overstates it where the offset is
// the same at every set point.
const ChamberUniformity = 0.5

// temperatureSetter is a step that gives the sweeps after it a known
// temperature (Sweep.TempC, Sweep.TempKnown): a soak.
type temperatureSetter interface {
	setsTemperature()
}

func (*soakStep) setsTemperature() {}

// tempcoStep is tempco as the file writes it.
type tempcoStep struct {
	Fits    []string          `yaml:"fits"`
	Results map[string]string `yaml:"results"`

	order  []string      // the order of Results' keys when not read from a file
	coefs  []Coefficient // the sequence's offset_tc and gain_tc, offset first
	sweeps []string      // each fit's sweep
	soaks  []string      // the step that set each sweep's temperature ("" = none found)
}

func (s *tempcoStep) Check(c *Checker) {
	c.SetStage(Adjustment)
	seq := c.Sequence()
	s.coefs = nil
	for _, what := range []string{AdjustOffsetTC, AdjustGainTC} {
		if k, ok := seq.Coefficient(what); ok {
			s.coefs = append(s.coefs, k)
			c.Use(k.Port, DUTPort)
		}
	}
	if len(s.Fits) < 2 {
		key := "fits"
		if s.Fits == nil {
			key = ""
		}
		c.Errorf(key, "expected two or more fits (fits: [room_fit, hot_fit]) of sweeps at different known temperatures, found %d", len(s.Fits))
	}
	s.sweeps, s.soaks = make([]string, len(s.Fits)), make([]string, len(s.Fits))
	bySweep, bySoak := map[string]int{}, map[string]int{}
	for i, name := range s.Fits {
		key := fmt.Sprintf("fits[%d]", i)
		d := c.Earlier(key, name, "fit")
		if d == nil {
			continue
		}
		fs, ok := d.Step.(*fitStep)
		if !ok || fs.Sweep == "" {
			continue
		}
		s.sweeps[i] = fs.Sweep
		if j, dup := bySweep[fs.Sweep]; dup {
			c.Errorf(key, "fit %q is of sweep %q, as fits[%d] is: a temperature coefficient needs sweeps at different temperatures", name, fs.Sweep, j)
			continue
		}
		bySweep[fs.Sweep] = i
		soak, found := soakBefore(c, fs.Sweep)
		if !found {
			continue // the fit step reports a missing sweep
		}
		if soak == "" {
			c.Errorf(key, "fit %q is of sweep %q, which no soak step precedes: its temperature is not known (put a soak step before the sweep)", name, fs.Sweep)
			continue
		}
		s.soaks[i] = soak
		if j, dup := bySoak[soak]; dup {
			c.Errorf(key, "fit %q is of sweep %q, made at the temperature of soak %q as fits[%d]'s sweep: a temperature coefficient needs sweeps at different temperatures", name, fs.Sweep, soak, j)
			continue
		}
		bySoak[soak] = i
	}
	if len(s.coefs) == 0 && len(s.Results) == 0 {
		c.Errorf("", "nothing to do: the sequence declares no offset_tc or gain_tc coefficient (coefficients: … adjusts: offset_tc) and the step names no results (results: {offset_tc: NAME, gain_tc: NAME})")
	}
	for _, what := range orderedKeys(c, "results", s.Results, s.order) {
		def := ResultDef{Name: s.Results[what], Stage: Adjustment, Quantity: what}
		switch what {
		case AdjustOffsetTC:
			def.Dim, def.About = seq.ResponseDim, "offset temperature coefficient, "+unitOf(seq.ResponseDim)+" per °C"
		case AdjustGainTC:
			def.Dim, def.About = units.Ratio, "gain temperature coefficient, fraction per °C"
		default:
			c.Errorf("results."+what, "unknown tempco result %q (expected offset_tc or gain_tc: the coefficient per °C)", what)
			continue
		}
		if k, ok := seq.Coefficient(what); ok {
			def.About = k.Name + " " + def.About + " written"
			def.Range = coefRange(k)
		}
		c.Declare("results."+what, def)
	}
}

// soakBefore returns the name of the last step before sweep that sets the
// temperature ("" when none does); found is false when there is no sweep so
// called.
func soakBefore(c *Checker, sweep string) (soak string, found bool) {
	at := -1
	for i, d := range c.earlier {
		if d.Name == sweep {
			at = i
		}
	}
	if at < 0 {
		return "", false
	}
	for i := at - 1; i >= 0; i-- {
		if _, ok := c.earlier[i].Step.(temperatureSetter); ok {
			return c.earlier[i].Name, true
		}
	}
	return "", true
}

// TempcoPoint is one fit's value (intercept − Y0, or slope/G − 1) at the
// temperature of its sweep, with their standard uncertainties.
type TempcoPoint struct {
	T, UT  float64 // °C
	Y, UY  float64 // SI (response unit, or a fraction)
	DOF    float64 // of UY
	Source string  // for messages: the fit's name
}

// TempcoLine is the weighted least-squares slope dY/dT through ps (weights
// 1/UY²; with two points the difference quotient) with its standard uncertainty
// by the law of propagation (JCGM 100 §5.1.2) over every Y and every T, taken
// as uncorrelated, and its Welch–Satterthwaite degrees of freedom. It needs two
// or more points with different temperatures.
func TempcoLine(ps []TempcoPoint) (slope, u, dof float64, err error) {
	if len(ps) < 2 {
		return 0, 0, 0, fmt.Errorf("%d fits: a temperature coefficient needs two or more", len(ps))
	}
	// Weights 1/UY²; a fit without uncertainty (on paper) leaves every weight 1.
	unweighted := false
	for _, p := range ps {
		unweighted = unweighted || !(p.UY > 0)
	}
	w := make([]float64, len(ps))
	var sw, st, sy float64
	for i, p := range ps {
		w[i] = 1
		if !unweighted {
			w[i] = 1 / (p.UY * p.UY)
		}
		sw += w[i]
		st += w[i] * p.T
		sy += w[i] * p.Y
	}
	tbar, ybar := st/sw, sy/sw
	var stt, sty float64
	for i, p := range ps {
		stt += w[i] * (p.T - tbar) * (p.T - tbar)
		sty += w[i] * (p.T - tbar) * (p.Y - ybar)
	}
	if !(stt > 0) || !finite(stt) {
		return 0, 0, 0, fmt.Errorf("every fit is at %s °C: a temperature coefficient needs different temperatures", units.FormatSig(tbar, 4))
	}
	slope = sty / stt
	// ∂b/∂Y_i = w_i(T_i − T̄)/Stt; ∂b/∂T_i = w_i[(Y_i − Ȳ) − 2b(T_i − T̄)]/Stt
	// (b = Sty/Stt with Sty = ΣwTY − W·T̄Ȳ and Stt = ΣwT² − W·T̄²).
	var cs []uncertainty.Component
	for i, p := range ps {
		cy := w[i] * (p.T - tbar) / stt
		ct := w[i] * ((p.Y - ybar) - 2*slope*(p.T-tbar)) / stt
		cs = append(cs,
			uncertainty.Component{Name: p.Source, U: math.Abs(cy) * p.UY, DOF: p.DOF},
			uncertainty.Component{Name: p.Source + " temperature", U: math.Abs(ct) * p.UT, DOF: math.Inf(1)})
	}
	u, dof = uncertainty.Combine(cs)
	return slope, u, dof, nil
}

// soakTempU is the standard uncertainty of the unit's temperature after the soak
// step called soak: the standard deviation of the mean of its readings over the
// dwell, SDC/√n, and the chamber's uniformity (ChamberUniformity, rectangular).
// Without the soak's record only the uniformity counts.
func soakTempU(rec *Record, soak string) float64 {
	uu := ChamberUniformity / math.Sqrt(3)
	for i := len(rec.Soaks) - 1; i >= 0; i-- {
		sk := rec.Soaks[i]
		if sk.Step != soak || soak == "" {
			continue
		}
		n := 0
		for _, r := range sk.Readings {
			if !sk.Stable.IsZero() && r.Time.Before(sk.Stable) {
				continue
			}
			n++
		}
		if n > 0 {
			return math.Hypot(sk.SDC/math.Sqrt(float64(n)), uu)
		}
		break
	}
	return uu
}

func (s *tempcoStep) Run(ctx context.Context, u *Unit) error {
	seq := u.seq
	off := make([]TempcoPoint, len(s.Fits))
	gain := make([]TempcoPoint, len(s.Fits))
	var missing []string
	// The unit's own slope at the reference: the fit whose temperature is
	// nearest TempcoRef. The gain TC is the relative change of the unit's slope
	// (the firmware divides by 1 + gain_tc·ΔT), and the offset drift is referred
	// to the trimmed unit, whose slope is the ideal gain: a gain trim after these
	// sweeps scales the drift by G/slope_ref.
	ref, refT := 0.0, math.Inf(1)
	for i, name := range s.Fits {
		fk, ok := u.Kept(name).(fitKept)
		sk, ok2 := u.Kept(s.sweeps[i]).(sweepKept)
		if !ok || !ok2 || !sk.sweep.TempKnown || fk.a.sum.Slope == 0 {
			continue
		}
		if d := math.Abs(sk.sweep.TempC - TempcoRef); d < refT {
			ref, refT = fk.a.sum.Slope, d
		}
	}
	if ref == 0 {
		ref = seq.IdealGain
	}
	scale := seq.IdealGain / ref
	for i, name := range s.Fits {
		fk, ok := u.Kept(name).(fitKept)
		if !ok {
			s.invalid(u, fmt.Sprintf("fit %q was not made", name))
			u.End(fmt.Sprintf("not measured: fit %q was not made", name))
			return nil
		}
		sk, ok := u.Kept(s.sweeps[i]).(sweepKept)
		if !ok || !sk.sweep.TempKnown {
			missing = append(missing, fmt.Sprintf("fit %q (sweep %q)", name, s.sweeps[i]))
			continue
		}
		t, ut := sk.sweep.TempC, soakTempU(u.Rec, s.soaks[i])
		uo, do := fk.a.linear([2]float64{scale, 0})
		ug, dg := fk.a.linear([2]float64{0, 1 / ref})
		off[i] = TempcoPoint{T: t, UT: ut, Y: (fk.a.sum.Intercept - seq.IdealOffset) * scale, UY: math.Abs(uo), DOF: do, Source: name}
		gain[i] = TempcoPoint{T: t, UT: ut, Y: fk.a.sum.Slope/ref - 1, UY: math.Abs(ug), DOF: dg, Source: name}
	}
	fail := func(why string) error {
		s.invalid(u, why)
		if u.Predicting() {
			return nil
		}
		u.Fail("cannot compute temperature coefficients: " + why)
		u.End("cannot compute temperature coefficients: " + why)
		return nil
	}
	if len(missing) > 0 {
		return fail("no known temperature for " + strings.Join(missing, ", ") + " (no soak before the sweep)")
	}
	var tc, tcU, tcDOF [2]float64 // offset_tc (SI per °C), gain_tc (per °C)
	for j, ps := range [][]TempcoPoint{off, gain} {
		b, ub, db, err := TempcoLine(ps)
		if err != nil {
			return fail(err.Error())
		}
		tc[j], tcU[j], tcDOF[j] = b, ub, db
	}
	at := map[string]int{AdjustOffsetTC: 0, AdjustGainTC: 1}
	ideal := make([]float64, len(s.coefs))
	idealU := make([]float64, len(s.coefs))
	idealDOF := make([]float64, len(s.coefs))
	for i, k := range s.coefs {
		j := at[k.Adjusts]
		ideal[i], idealU[i], idealDOF[i] = tc[j]/k.UnitSI, tcU[j]/k.UnitSI, tcDOF[j]
	}
	// A result with no coefficient to write is the measured coefficient itself.
	for what, r := range s.Results {
		if _, ok := seq.Coefficient(what); !ok {
			j := at[what]
			u.SetU(r, tc[j], u.Unc(tcU[j], tcDOF[j]))
		}
	}
	if len(s.coefs) == 0 {
		return nil
	}
	return writeCoefficients(ctx, u, s.coefs, s.Results, ideal, idealU, idealDOF)
}

// TempcoRef (°C) is the temperature tempco refers the unit's slope to: the
// fit made nearest it gives slope_ref. A firmware's reference is commonly 25 °C;
// at another temperature the gain TC changes by a factor 1 + gain_tc·ΔT, a
// second-order difference.
const TempcoRef = 25.0

// invalid marks every result of the step not computed, for why.
func (s *tempcoStep) invalid(u *Unit, why string) {
	for _, r := range s.Results {
		u.Invalid(r, why)
	}
}
