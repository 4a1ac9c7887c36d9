package sequencer

// The measure step: one stimulus level (or none, the source output off) and one
// set of readings, as results: a reference output at a level, or the output with
// the input not driven for a zero check.

import (
	"context"
	"fmt"
	"math"
	"sort"
	"time"

	"trimline/instruments"
	"trimline/instruments/units"
	"trimline/sequencer/uncertainty"
)

func init() {
	RegisterStep(StepKind{Name: "measure", PerChannel: true, About: "programs one level (or leaves the source off), settles, takes readings and names their mean, error and noise",
		New: func() Step { return new(measureStep) }})
}

// The results a measure step can give, as its results: map names them.
var measureOutputs = map[string]struct {
	dim   units.Dim
	about string
}{
	"mean":  {units.Volt, "mean of the readings, V"},
	"error": {units.Volt, "mean − ideal output at the level, V"},
	"noise": {units.Volt, "standard deviation of the readings, V rms"},
}

// measureStep is a measure step as the sequence file writes it.
type measureStep struct {
	Level    *units.Voltage    `yaml:"level"`
	Settle   *units.Duration   `yaml:"settle"`
	Readings int               `yaml:"readings"`
	Source   string            `yaml:"source"`
	Meter    string            `yaml:"meter"`
	Stage    string            `yaml:"stage"`
	MeterSet *units.Voltage    `yaml:"meter_range"`
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
	inBounds := checkReadings(c, readingKeys{source: s.Source, meter: s.Meter, stage: s.Stage, meterRange: s.MeterSet, nplc: s.NPLC,
		settle: s.Settle, readings: s.Readings}, 2, "2 readings (one gives no noise estimate)", &p)
	if s.Level != nil {
		if v := float64(*s.Level); finite(v) {
			p.List, p.From, p.To, s.driven = []float64{v}, v, v, true
		} else {
			c.Errorf("level", "expected a finite level")
		}
	}
	if inBounds {
		if t := sweepTime(p, p.MeterSet.NPLC); t > MaxSweepTime {
			c.Errorf("", "expected a measurement of at most %s: settle %s + %d readings × %g PLC at 50 Hz is %s",
				MaxSweepTime, p.Settle, p.Readings, p.MeterSet.NPLC, t.Round(time.Second))
		}
	}
	s.plan = p
	if len(s.Results) == 0 {
		c.Errorf("", "missing required key \"results\": name what the step gives (%s), e.g. results: {mean: zero_output}", measureOutputsText())
	}
	for _, what := range orderedKeys(c, "results", s.Results, nil) {
		o, ok := measureOutputs[what]
		if !ok {
			c.Errorf("results."+what, "unknown measure result %q (expected one of %s)", what, measureOutputsText())
			continue
		}
		name := s.Results[what]
		c.Declare("results."+what, ResultDef{Name: name, Dim: o.dim, Quantity: what, About: o.about, Range: s.rangeOf(what)})
		s.outs = append(s.outs, [2]string{what, name})
	}
}

func measureOutputsText() string {
	var out []string
	for k := range measureOutputs {
		out = append(out, k)
	}
	sort.Strings(out)
	return fmt.Sprint(out)
}

// ideal is the ideal output at the step's level, volts (the ideal offset when the
// input is not driven).
func (s *measureStep) ideal(seq *Sequence) float64 {
	if s.driven {
		return seq.IdealGain*s.plan.From + seq.IdealOffset
	}
	return seq.IdealOffset
}

// rangeOf is the physical range of a result, for lint: the readable output, that
// less the ideal output, and 0 to its half-span.
func (s *measureStep) rangeOf(what string) func(*Sequence) (float64, float64, bool) {
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
	return []Stimulus{{Role: s.plan.Source, Level: s.plan.From, Dim: units.Volt}}
}

// Least is the step's one engine step: its settle and its readings at the
// step's integration time on the slower, 50 Hz, line.
func (s *measureStep) Least() time.Duration {
	return s.plan.Settle + time.Duration(s.plan.Readings)*time.Duration(s.plan.MeterSet.NPLC/50*float64(time.Second))
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
			u.Rec.Sweeps = append(u.Rec.Sweeps, sw)
		}
		if err != nil {
			return err
		}
	case u.Replaying():
		stored, ok := storedSweep(u.stored, name, u.channel)
		if !ok || len(stored.Points) != 1 {
			u.End("") // the recorded run ended before this step
			return nil
		}
		sw.Points = []Point{point(stored.Points[0].Stimulus, stored.Points[0].Readings)}
		s.annotate(u.cfg, &sw.Points[0])
		u.Rec.Sweeps = append(u.Rec.Sweeps, sw)
	default: // predicting: the ideal output, one noiseless reading
		sw.Points = []Point{{Stimulus: s.plan.From, Mean: s.ideal(u.seq), Valid: 1, Readings: make([]instruments.Reading, 1)}}
		s.annotate(u.cfg, &sw.Points[0])
		u.Rec.Sweeps = append(u.Rec.Sweeps, sw)
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
			return fmt.Sprintf("%s at %s", name, fmtV(p.From))
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
		if rs, err = u.Read(ctx, p.Meter, p.Readings, p.MeterSet); err != nil {
			rs = nil
			return fmt.Errorf("%s: read meter: %w", where(), err)
		}
		// As in a sweep: the unit's output cannot leave its rails, so an
		// invalid reading is the station's problem, not a measurement.
		for j, r := range rs {
			if !r.Valid() {
				return u.Fault("%s: meter reported %s (reading %d of %d): check the meter range and the wiring",
					where(), firstBad(rs[j:j+1]), j+1, len(rs))
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
	meter, source, res := specs(cfg.Station, s.plan)
	cs := []uncertainty.Component{
		uncertainty.Rectangular("meter", meter.HalfWidth(p.Mean)),
		uncertainty.Resolution("resolution", res),
	}
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
		case "error":
			u.SetU(name, p.Mean-s.ideal(u.seq), with(true))
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
