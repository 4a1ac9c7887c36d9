package sequencer

// The zero check: the station's own zero, measured through the unit. The unit's
// output is read twice, with the source output off (the fixture shorts the input:
// a true zero) and with the source programmed to 0 and its output on (what the
// station really delivers at 0: the source's own offset plus the thermal EMFs of
// the wiring). The difference, referred to the input through the ideal gain, is
// the source offset ô_s; the unit's own offset and the meter's offset are in both
// readings and cancel. Later sweeps on the same source and range have their
// levels corrected by ô_s, and the fit's source-offset input becomes ô_s's own
// Type A uncertainty instead of the rectangular spec term it replaces
// (uncertainty.Sweep.SourceZero). At a 200 V/V gain, 0.5 µV at the input is
// 100 µV at the output, common practice to check for.

import (
	"context"
	"fmt"
	"math"
	"time"

	"trimline/instruments"
	"trimline/instruments/units"
	"trimline/sequencer/uncertainty"
)

func init() {
	RegisterStep(StepKind{Name: "zero_check", PerChannel: true,
		About: "reads the output with the source off (input shorted) and at a programmed 0: the station's own zero at the input, applied to later sweeps' fits",
		New:   func() Step { return new(zeroStep) }})
}

// ZeroCheck is what a zero_check step measured (Record.Zeros): the unit's output
// with the input shorted and at a programmed 0, and the source offset ô_s they
// give at the input.
type ZeroCheck struct {
	Name    string `json:"name"`              // the step's name
	Channel string `json:"channel,omitempty"` // the channel checked ("" for a one-channel unit)
	Source  string `json:"source"`            // the source role checked
	// Range is the source spec's range the check covers, in the stimulus's
	// unit: the one a 0 level selects (the station file's smallest); only
	// sweeps whose levels use this range apply the check. 0 = no range stated.
	Range float64 `json:"range_v,omitempty"`
	// Shorted are the output readings with the source output off (the fixture
	// shorts the input); AtZero with the source programmed to 0, output on.
	Shorted []instruments.Reading `json:"shorted"`
	AtZero  []instruments.Reading `json:"at_zero"`
	// Gain is the gain the output difference is referred to the input through:
	// the sequence's ideal gain (response unit per stimulus unit).
	Gain float64 `json:"gain"`
	// Offset is ô_s, the stimulus the station delivers at a programmed 0,
	// (mean(AtZero) − mean(Shorted))/Gain, in the stimulus's unit; Unc its
	// uncertainty (the readings' scatter and resolution, Welch–Satterthwaite
	// degrees of freedom). Valid is false when a reading was invalid (Note
	// says which).
	Offset float64     `json:"offset_v"`
	Unc    Uncertainty `json:"uncertainty"`
	Valid  bool        `json:"valid"`
	Note   string      `json:"note,omitempty"`
	// SpecU is the standard uncertainty of the source's offset spec on Range
	// (of_range·range/√3, rectangular), the term the check replaces; 0 when the
	// station states none. Applied says whether later fits correct their levels
	// by ô_s: only when the check's u is below SpecU (or no spec is stated). A
	// check read through a unit too noisy to resolve the zero does not move the
	// trim by its noise; the fits then budget what it could not rule out — the
	// spec, the uncorrected ô_s and the check's u, in quadrature — because the
	// spec bounds the source's offset but not the wiring's thermal EMFs, which
	// the check also sees.
	SpecU   float64 `json:"spec_u_v,omitempty"`
	Applied bool    `json:"applied,omitempty"`
}

// The results a zero check can give, as its results: map names them.
var zeroOutputs = map[string]struct {
	about string
	input bool // in the stimulus's unit (else the response's)
}{
	"source_zero":    {"stimulus the station delivers at a programmed 0 (source offset and thermal EMFs), at the input", true},
	"shorted_output": {"mean output with the input shorted (source output off)", false},
}

// zeroStep is a zero_check step as the sequence file writes it. readings is the
// number taken in each of the two states.
type zeroStep struct {
	Settle   *units.Duration   `yaml:"settle"`
	Readings int               `yaml:"readings"`
	Source   string            `yaml:"source"`
	Meter    string            `yaml:"meter"`
	Response *responseDecl     `yaml:"response"`
	Stage    string            `yaml:"stage"`
	MeterSet *units.Quantity   `yaml:"meter_range"`
	NPLC     *float64          `yaml:"nplc"`
	Results  map[string]string `yaml:"results"`

	plan SweepPlan   // the one level, 0, as a plan: roles, meter settings, settle, readings
	outs [][2]string // (what, result name), in the file's order
}

var (
	_ Stimulator = (*zeroStep)(nil)
	_ Timed      = (*zeroStep)(nil)
)

func (s *zeroStep) Check(c *Checker) {
	seq := c.Sequence()
	p := SweepPlan{Points: 1, List: []float64{0}}
	k := readingKeys{source: s.Source, meter: s.Meter, response: s.Response, quantity: seq.ResponseDim,
		stage: s.Stage, meterRange: s.MeterSet, nplc: s.NPLC, settle: s.Settle, readings: s.Readings}
	inBounds := checkReadings(c, k, 2, "2 readings in each state (one gives no Type A estimate)", &p)
	if seq.stimDim() != units.Volt {
		c.Errorf("", "a zero check measures a voltage source's offset and thermal EMFs; this sequence drives a current (its ideal gain is per ampere)")
	}
	if inBounds {
		if t := s.least(p); t > MaxSweepTime {
			c.Errorf("", "expected a zero check of at most %s: 2 × (settle %s + %d readings × %g PLC at 50 Hz) is %s",
				MaxSweepTime, p.Settle, p.Readings, p.MeterSet.NPLC, t.Round(time.Second))
		}
	}
	s.plan = p
	for _, what := range orderedKeys(c, "results", s.Results, nil) {
		o, ok := zeroOutputs[what]
		if !ok {
			c.Errorf("results."+what, "unknown zero_check result %q (expected one of %s)", what, keysText(zeroOutputs))
			continue
		}
		d, about := p.Quantity, o.about+", "+unitOf(p.Quantity)
		if o.input {
			d, about = seq.stimDim(), o.about+", "+unitOf(seq.stimDim())
		}
		c.Declare("results."+what, ResultDef{Name: s.Results[what], Dim: d, Quantity: what, About: about})
		s.outs = append(s.outs, [2]string{what, s.Results[what]})
	}
}

// least is the check's time: two states, each a settle and the readings.
func (s *zeroStep) least(p SweepPlan) time.Duration { return 2 * p.pointTime() }

// Stimuli is the one level the check programs: 0 on its source.
func (s *zeroStep) Stimuli() []Stimulus {
	return []Stimulus{{Role: s.plan.Source, Level: 0, Dim: s.plan.stimDim()}}
}

// Least is the check's longest engine step: one state's settle and readings.
func (s *zeroStep) Least() time.Duration { return s.plan.pointTime() }

// Budget is the check's estimated time and its readings.
func (s *zeroStep) Budget() (time.Duration, int) { return s.least(s.plan), 2 * s.plan.Readings }

// sourceRangeAt is the source spec's range a level x uses (SpecAt on auto range).
func sourceRangeAt(st *Station, role string, d units.Dim, x float64) float64 {
	return st.Instruments[role].SpecAt(d, 0, x).Range
}

func (s *zeroStep) Run(ctx context.Context, u *Unit) error {
	z := ZeroCheck{Name: u.step.Name, Channel: u.channel, Source: s.plan.Source, Gain: u.seq.IdealGain,
		Range: sourceRangeAt(u.cfg.Station, s.plan.Source, s.plan.stimDim(), 0)}
	switch {
	case u.Live():
		var err error
		z.Shorted, z.AtZero, err = s.measure(ctx, u)
		if z.Shorted == nil && z.AtZero == nil {
			return err
		}
		s.finish(u, &z)
		if err != nil {
			return err
		}
	case u.Replaying(): // the readings are facts of the run: take them from the record
		stored, ok := storedZero(u.stored, z.Name, z.Channel)
		if !ok {
			u.End("") // the recorded run ended before this step
			return nil
		}
		z.Shorted, z.AtZero = stored.Shorted, stored.AtZero
		s.finish(u, &z)
	default:
		// On paper the check reads the ideal unit without noise, as a sweep
		// does: the same output in both states, so ô_s = 0 with only the
		// resolution's uncertainty; the scatter of a real check only adds to
		// it, as the sweeps' noise does to theirs.
		ideal := make([]instruments.Reading, s.plan.Readings)
		for i := range ideal {
			ideal[i].Value = u.seq.IdealOffset
		}
		z.Shorted, z.AtZero = ideal, ideal
		s.finish(u, &z)
	}
	return nil
}

// finish computes ô_s from the readings, adds the check to the record, keeps it
// for later sweeps on its source and sets the step's results.
func (s *zeroStep) finish(u *Unit, z *ZeroCheck) {
	defer func() { u.Rec.Zeros = append(u.Rec.Zeros, *z) }()
	off, on := point(0, z.Shorted), point(0, z.AtZero)
	if off.Valid != len(z.Shorted) || on.Valid != len(z.AtZero) || off.Valid < 2 || on.Valid < 2 {
		z.Note = fmt.Sprintf("%s: invalid or missing readings (shorted %d of %d valid, at 0 %d of %d)",
			z.Name, off.Valid, len(z.Shorted), on.Valid, len(z.AtZero))
		for _, o := range s.outs {
			u.Invalid(o[1], z.Note)
		}
		u.End(z.Note)
		return
	}
	_, _, res := specs(u.cfg.Station, s.plan, off.Mean, 0)
	std, dof := zeroU(off, on, z.Gain, res)
	if !(dof > 0) { // noiseless readings (0/0): an exact difference
		dof = math.Inf(1)
	}
	z.Offset, z.Unc, z.Valid = (on.Mean-off.Mean)/z.Gain, u.Unc(std, dof), true
	spec := u.cfg.Station.Instruments[z.Source].SpecAt(s.plan.stimDim(), 0, 0)
	z.SpecU = spec.OfRange * spec.Range / math.Sqrt(3)
	kept := zeroKept{name: z.Name, role: z.Source, rng: z.Range, offset: z.Offset, u: std, dof: dof}
	if z.Applied = z.SpecU == 0 || std < z.SpecU; !z.Applied {
		// No correction; an uncorrected known offset enters the budget with its
		// uncertainty (common practice), beside the spec it may exceed.
		kept.offset, kept.kind = 0, uncertainty.KindAB
		kept.u, kept.dof = uncertainty.Combine([]uncertainty.Component{
			{Name: "source offset spec", U: z.SpecU, DOF: math.Inf(1)},
			{Name: "uncorrected station zero", U: math.Abs(z.Offset), DOF: math.Inf(1)},
			{Name: "zero check", U: std, DOF: dof},
		})
	}
	u.keepZero(kept)
	// A zero beyond the source's offset spec by more than the check's own U is the
	// station's, not the source's: thermal EMFs in the wiring or a fault. The fits
	// correct for it; the operator is told to look.
	if a := spec.OfRange * spec.Range; a > 0 && math.Abs(z.Offset) > a+z.Unc.Expanded {
		u.Rec.Notes = append(u.Rec.Notes, fmt.Sprintf("station zero %s is beyond the source's offset spec ±%s by more than its U %s: "+
			"check the fixture's wiring for thermal EMFs (the fits correct for it)",
			units.Format(z.Offset, unitOf(s.plan.stimDim()), 3), units.Format(a, unitOf(s.plan.stimDim()), 2),
			units.Format(z.Unc.Expanded, unitOf(s.plan.stimDim()), 2)))
	}
	for _, o := range s.outs {
		switch name := o[1]; o[0] {
		case "source_zero":
			u.SetU(name, z.Offset, z.Unc)
		case "shorted_output":
			// A reading of the unit's output: the scatter and, as a measure
			// step's mean, the meter's spec there and its resolution.
			meter, _, res := specs(u.cfg.Station, s.plan, off.Mean, 0)
			cs := []uncertainty.Component{{Name: "repeatability", U: off.SD / math.Sqrt(float64(off.Valid)), DOF: float64(off.Valid - 1), Kind: uncertainty.KindA}}
			if s.plan.Response == nil {
				cs = append(cs, uncertainty.Rectangular("meter", meter.HalfWidth(off.Mean)))
			}
			std, dof := uncertainty.Combine(append(cs, uncertainty.Resolution("resolution", res)))
			u.SetU(name, off.Mean, u.Unc(std, dof))
		}
	}
}

// zeroU is the standard uncertainty of (mean(on) − mean(off))/gain and its
// degrees of freedom: each mean's Type A standard uncertainty s/√n (JCGM 100
// §4.2.3) with n − 1 degrees of freedom and half a count of the reading's
// resolution res (rectangular, JCGM 100 F.2.2.1), combined in quadrature (the two
// sets of readings are independent, JCGM 100 §5.1.2) with Welch–Satterthwaite
// degrees of freedom (JCGM 100 §G.4.1). The two scatters are not pooled: with the
// output on the source's own noise adds to the readings, so their variances
// differ. The meter's offset and gain errors are the same in both means and
// cancel (to its gain error times the difference, negligible).
func zeroU(off, on Point, gain, res float64) (std, dof float64) {
	g := math.Abs(gain)
	return uncertainty.Combine([]uncertainty.Component{
		{Name: "shorted", U: off.SD / math.Sqrt(float64(off.Valid)) / g, DOF: float64(off.Valid - 1), Kind: uncertainty.KindA},
		{Name: "at zero", U: on.SD / math.Sqrt(float64(on.Valid)) / g, DOF: float64(on.Valid - 1), Kind: uncertainty.KindA},
		uncertainty.Resolution("shorted resolution", res/g),
		uncertainty.Resolution("at zero resolution", res/g),
	})
}

// measure does the check on the bench in three engine steps (each under the
// station's step deadline): the source at 0 with its output off, the settle, the
// shorted readings and the error queues; the output on, the settle, the readings
// at 0 and the error queues; then the output off, which leaves the source safe
// (off, at 0), whatever happened before. It returns the readings taken.
func (s *zeroStep) measure(ctx context.Context, u *Unit) (shorted, atZero []instruments.Reading, err error) {
	name, p := u.step.Name, s.plan
	read := func(ctx context.Context, where func() string) ([]instruments.Reading, error) {
		if err := u.Wait(ctx, p.Settle); err != nil {
			return nil, err
		}
		rs, err := u.e.readings(ctx, u, p, where)
		if err != nil {
			return nil, err
		}
		for j, r := range rs { // as in a sweep: an invalid reading is the station's problem
			if !r.Valid() {
				return rs, u.e.blame(p.readerRole(), "reported "+firstBad(rs[j:j+1]), u.Fault("%s: meter reported %s (reading %d of %d): check the meter range and the wiring",
					where(), firstBad(rs[j:j+1]), j+1, len(rs)))
			}
		}
		return rs, nil
	}
	err = u.Do(ctx, func(ctx context.Context) error {
		if err := u.Output(ctx, p.Source, false); err != nil {
			return fmt.Errorf("%s: source output off: %w", name, err)
		}
		if err := u.Level(ctx, p.Source, 0); err != nil {
			return err
		}
		where := func() string { return name + " with the input shorted (source output off)" }
		var err error
		if shorted, err = read(ctx, where); err != nil {
			return err
		}
		return u.e.checkErrors(ctx, where)
	})
	if err == nil {
		u.emitPoint(0, point(0, shorted).Mean, u.seq.IdealOffset)
	}
	if err == nil {
		err = u.Do(ctx, func(ctx context.Context) error {
			if err := u.Output(ctx, p.Source, true); err != nil {
				return fmt.Errorf("%s: source output on: %w", name, err)
			}
			where := func() string { return name + " at a programmed 0 (source output on)" }
			var err error
			if atZero, err = read(ctx, where); err != nil {
				return err
			}
			return u.e.checkErrors(ctx, where)
		})
		if err == nil {
			u.emitPoint(0, point(0, atZero).Mean, u.seq.IdealOffset)
		}
	}
	if offErr := u.Do(ctx, func(ctx context.Context) error { return u.Output(ctx, p.Source, false) }); offErr != nil && err == nil {
		err = fmt.Errorf("%s: source output off: %w", name, offErr)
	}
	return shorted, atZero, err
}

// storedZero finds the zero check called name of channel ch in a stored record.
func storedZero(rec *Record, name, ch string) (ZeroCheck, bool) {
	for _, z := range rec.Zeros {
		if z.Name == name && z.Channel == ch {
			return z, true
		}
	}
	return ZeroCheck{}, false
}

// zeroKept is a zero check's result that later sweeps on its source apply.
type zeroKept struct {
	name   string
	role   string
	rng    float64 // the source range it covers
	offset float64 // ô_s, V at the input, that the fits correct their levels by (0 when not applied)
	u, dof float64 // the standard uncertainty of what remains, and its degrees of freedom
	kind   string  // its evaluation: Type A, or A+B when the check is budgeted beside the spec
}

// keepZero keeps z as the latest zero check of its source on the running
// step's channel.
func (u *Unit) keepZero(z zeroKept) {
	if u.zeros == nil {
		u.zeros = map[string]zeroKept{}
	}
	u.zeros[u.key(z.role)] = z
}

// withZero is plan with the latest zero check of its source (on the running
// step's channel) attached, when the plan's levels use the range that check
// covers; plan unchanged otherwise. A sweep step keeps what it returns, so the
// fits of that sweep apply the check (analyse).
func (u *Unit) withZero(plan SweepPlan) SweepPlan {
	z, ok := u.zeros[u.key(plan.Source)]
	if !ok {
		z, ok = u.zeros[plan.Source] // a check of the whole unit
	}
	if !ok || plan.stimDim() != units.Volt {
		return plan
	}
	var x float64
	for _, l := range plan.Levels() {
		x = math.Max(x, math.Abs(l))
	}
	if sourceRangeAt(u.cfg.Station, plan.Source, units.Volt, x) != z.rng {
		return plan
	}
	plan.zero = &z
	return plan
}

// apply corrects the sweep's levels by the measured source offset and puts its
// uncertainty in place of the source's offset spec term; it returns the check's
// name ("" for a nil z, which changes nothing).
func (z *zeroKept) apply(s *uncertainty.Sweep) string {
	if z == nil {
		return ""
	}
	for i := range s.X {
		s.X[i] += z.offset
	}
	s.SourceZero = &uncertainty.Measured{U: z.u, DOF: z.dof, Kind: z.kind}
	return z.name
}
