package sequencer

// The measure step: one stimulus level (or none, the source output off) and one
// set of readings, as results: a reference output at a level, or the output with
// the input not driven for a zero check.

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
	RegisterStep(StepKind{Name: "measure", PerChannel: true, About: "programs one level (or leaves the source off), settles, takes readings and names their mean, error and noise",
		New: func() Step { return new(measureStep) }})
}

// The results a measure step can give, as its results: map names them; each is
// in the unit of the quantity the step reads.
var measureOutputs = map[string]struct {
	about string
}{
	"mean":  {"mean of the readings"},
	"error": {"mean − ideal output at the level"},
	"noise": {"standard deviation of the readings, rms"},
}

// quantities are the words of a measure step's quantity: key.
var quantities = map[string]units.Dim{"voltage": units.Volt, "current": units.Ampere, "count": units.Count}

// unitOf is the unit of a reading or response of dimension d as results, and
// an offset coefficient by default, write it: V, A or count.
func unitOf(d units.Dim) string {
	switch d {
	case units.Ampere:
		return "A"
	case units.Count:
		return "count"
	}
	return "V"
}

// measureStep is a measure step as the sequence file writes it.
type measureStep struct {
	Level    *level            `yaml:"level"`
	Settle   *units.Duration   `yaml:"settle"`
	Readings int               `yaml:"readings"`
	Source   string            `yaml:"source"`
	Meter    string            `yaml:"meter"`
	Response *responseDecl     `yaml:"response"`
	Quantity string            `yaml:"quantity"`
	Stage    string            `yaml:"stage"`
	MeterSet *units.Quantity   `yaml:"meter_range"`
	NPLC     *float64          `yaml:"nplc"`
	Results  map[string]string `yaml:"results"`

	// plan is the one point as a sweep plan (Points 1, List the level or
	// nothing): the specs, the record's annotation and the timing read it.
	plan   SweepPlan
	driven bool        // a level is programmed; else the source output stays off
	outs   [][2]string // (what, result name), in the file's order
}

var (
	_ Stimulator = (*measureStep)(nil)
	_ Timed      = (*measureStep)(nil)
)

func (s *measureStep) Check(c *Checker) {
	p := SweepPlan{Points: 1}
	k := readingKeys{source: s.Source, meter: s.Meter, response: s.Response, quantity: c.Sequence().ResponseDim,
		stage: s.Stage, meterRange: s.MeterSet, nplc: s.NPLC, settle: s.Settle, readings: s.Readings}
	if s.Quantity != "" {
		if d, ok := quantities[s.Quantity]; ok {
			k.quantity, k.quantityKey = d, "quantity"
		} else {
			c.Errorf("quantity", "expected voltage, current or count, found %q", s.Quantity)
		}
	}
	inBounds := checkReadings(c, k, 2, "2 readings (one gives no noise estimate)", &p)
	if s.Level != nil {
		if v, ok := c.level("level", *s.Level); ok {
			p.List, p.From, p.To, s.driven = []float64{v}, v, v, true
		}
	}
	if inBounds {
		if t := sweepTime(p); t > MaxSweepTime {
			c.Errorf("", "expected a measurement of at most %s: settle %s + %d readings × %g PLC at 50 Hz is %s",
				MaxSweepTime, p.Settle, p.Readings, p.MeterSet.NPLC, t.Round(time.Second))
		}
	}
	s.plan = p
	if len(s.Results) == 0 {
		c.Errorf("", "missing required key \"results\": name what the step gives (%s), e.g. results: {mean: zero_output}", keysText(measureOutputs))
	}
	for _, what := range orderedKeys(c, "results", s.Results, nil) {
		o, ok := measureOutputs[what]
		if !ok {
			c.Errorf("results."+what, "unknown measure result %q (expected one of %s)", what, keysText(measureOutputs))
			continue
		}
		if what == "error" && p.Quantity != c.Sequence().ResponseDim {
			c.Errorf("results.error", "the step reads a %s, not the unit's response (a %s): it has no ideal to give an error against; name its mean or noise", p.Quantity, c.Sequence().ResponseDim)
			continue
		}
		name := s.Results[what]
		c.Declare("results."+what, ResultDef{Name: name, Dim: p.Quantity, Quantity: what, About: o.about + ", " + unitOf(p.Quantity), Range: s.rangeOf(what, p.Quantity == c.Sequence().ResponseDim)})
		s.outs = append(s.outs, [2]string{what, name})
	}
}

// ideal is the ideal output at the step's level, in the response's unit (the
// ideal offset when the input is not driven).
func (s *measureStep) ideal(seq *Sequence) float64 {
	if s.driven {
		return seq.IdealGain*s.plan.From + seq.IdealOffset
	}
	return seq.IdealOffset
}

// rangeOf is the physical range of a result, for lint: the readable output, that
// less the ideal output, and 0 to its half-span.
// The range is unknown for a quantity other than the response.
func (s *measureStep) rangeOf(what string, response bool) func(*Sequence) (float64, float64, bool) {
	if !response {
		return nil
	}
	switch what {
	case "mean":
		return outputSpan
	case "error":
		return func(seq *Sequence) (float64, float64, bool) {
			lo, hi, ok := outputSpan(seq)
			y := s.ideal(seq)
			return lo - y, hi - y, ok
		}
	case "noise":
		return noiseRange
	}
	return nil
}

// Stimuli is the step's level on its source; none without a level.
func (s *measureStep) Stimuli() []Stimulus {
	if !s.driven {
		return nil
	}
	return []Stimulus{{Role: s.plan.Source, Level: s.plan.From, Dim: s.plan.stimDim()}}
}

// Least is the step's one engine step: its settle and its readings at the
// step's integration time on the slower, 50 Hz, line.
func (s *measureStep) Least() time.Duration {
	return s.plan.pointTime()
}

// Budget is the step's estimated time and its readings.
func (s *measureStep) Budget() (time.Duration, int) {
	return s.Least(), s.plan.Readings
}

func (s *measureStep) Run(ctx context.Context, u *Unit) error {
	name := u.step.Name
	sw := Sweep{Name: name, Channel: u.channel, Stage: u.step.Stage}
	switch {
	case u.Live():
		rs, err := s.measure(ctx, u)
		if rs != nil {
			sw.Points = []Point{point(s.plan.From, rs)}
			s.annotate(u.cfg, &sw.Points[0])
			sw = u.addSweep(sw)
		}
		if err != nil {
			return err
		}
		u.emitPoint(s.plan.From, sw.Points[0].Mean, s.ideal(u.seq))
	case u.Replaying():
		stored, ok := storedSweep(u.stored, name, u.channel)
		if !ok || len(stored.Points) != 1 {
			u.End("") // the recorded run ended before this step
			return nil
		}
		sw.Points = []Point{point(stored.Points[0].Stimulus, stored.Points[0].Readings)}
		s.annotate(u.cfg, &sw.Points[0])
		sw = u.addSweep(sw)
	default: // predicting: the ideal output, one noiseless reading
		sw.Points = []Point{{Stimulus: s.plan.From, Mean: s.ideal(u.seq), Valid: 1, Readings: make([]instruments.Reading, 1)}}
		s.annotate(u.cfg, &sw.Points[0])
		sw = u.addSweep(sw)
	}
	s.results(u, sw.Points[0])
	return nil
}

// measure does the step on the bench: the level with the output on (or the
// output left off), the settle, the readings and the error queues in one engine
// step, then the output off in another. It returns the readings taken, nil when
// none were.
func (s *measureStep) measure(ctx context.Context, u *Unit) ([]instruments.Reading, error) {
	name, p := u.step.Name, s.plan
	where := func() string {
		if s.driven {
			return fmt.Sprintf("%s at %s", name, fmtStim(p.Stimulus, p.From))
		}
		return name + " with the input not driven"
	}
	var rs []instruments.Reading
	err := u.Do(ctx, func(ctx context.Context) error {
		if err := u.e.checkInterlock(ctx); err != nil {
			return err
		}
		if s.driven {
			if err := u.Level(ctx, p.Source, p.From); err != nil {
				return err
			}
			if err := u.Output(ctx, p.Source, true); err != nil {
				return fmt.Errorf("%s: source output on: %w", name, err)
			}
		}
		if err := u.Wait(ctx, p.Settle); err != nil {
			return err
		}
		var err error
		if rs, err = u.e.readings(ctx, u, p, where); err != nil {
			rs = nil
			return err
		}
		// As in a sweep: the unit's output cannot leave its rails, so an
		// invalid reading is the station's problem, not a measurement.
		for j, r := range rs {
			if !r.Valid() {
				return u.e.blame(p.readerRole(), "reported "+firstBad(rs[j:j+1]), u.Fault("%s: meter reported %s (reading %d of %d): check the meter range and the wiring",
					where(), firstBad(rs[j:j+1]), j+1, len(rs)))
			}
		}
		return u.e.checkErrors(ctx, where)
	})
	if err != nil || !s.driven {
		return rs, err
	}
	if err := u.Do(ctx, func(ctx context.Context) error { return u.Output(ctx, p.Source, false) }); err != nil {
		return rs, fmt.Errorf("%s: source output off: %w", name, err)
	}
	return rs, nil
}

// annotate fills the point's Type A standard uncertainty (SD/√n) and its Type B
// one: the meter spec at the reading and half a count of resolution, and with a
// level the source spec there through the ideal gain, each rectangular (JCGM 100
// §4.3.7), as a sweep's points have them.
func (s *measureStep) annotate(cfg Config, p *Point) {
	if p.Valid > 1 {
		p.URandom = p.SD / math.Sqrt(float64(p.Valid))
	}
	if p.Valid > 0 {
		p.USys, _ = uncertainty.Combine(s.specs(cfg, *p, true))
	}
}

// specs are the Type B components of the point's mean; withSource adds the
// source's, when the step drives the input.
func (s *measureStep) specs(cfg Config, p Point, withSource bool) []uncertainty.Component {
	meter, source, res := specs(cfg.Station, s.plan, p.Mean, p.Stimulus)
	var cs []uncertainty.Component
	if s.plan.Response == nil { // the unit reporting itself has no meter spec
		cs = append(cs, uncertainty.Rectangular("meter", meter.HalfWidth(p.Mean)))
	}
	cs = append(cs, uncertainty.Resolution("resolution", res))
	if withSource && s.driven {
		cs = append(cs, uncertainty.Rectangular("source", math.Abs(cfg.Sequence.IdealGain)*source.HalfWidth(p.Stimulus)))
	}
	return cs
}

// results sets the step's results from its point.
func (s *measureStep) results(u *Unit, p Point) {
	if p.Valid != len(p.Readings) || p.Valid == 0 {
		note := fmt.Sprintf("%s: invalid reading (%s)", u.step.Name, firstBad(p.Readings))
		for _, o := range s.outs {
			u.Invalid(o[1], note)
		}
		u.End(note)
		return
	}
	nu := float64(p.Valid - 1)
	with := func(withSource bool) Uncertainty {
		cs := append([]uncertainty.Component{{Name: "repeatability", U: p.URandom, DOF: nu, Kind: uncertainty.KindA}},
			s.specs(u.cfg, p, withSource)...)
		std, dof := uncertainty.Combine(cs)
		return u.Unc(std, dof)
	}
	for _, o := range s.outs {
		switch name := o[1]; o[0] {
		case "mean":
			u.SetU(name, p.Mean, with(false))
			u.SetBudget(name, s.budget(u.cfg, p, false))
		case "error":
			u.SetU(name, p.Mean-s.ideal(u.seq), with(true))
			u.SetBudget(name, s.budget(u.cfg, p, true))
		case "noise":
			// u(s) ≈ s/√(2ν) (JCGM 100 E.4.3), as a fit's noise.
			if nu > 0 {
				u.SetU(name, p.SD, u.Unc(p.SD/math.Sqrt(2*nu), nu))
			} else {
				u.Invalid(name, "one reading: no noise estimate")
			}
		}
	}
}
