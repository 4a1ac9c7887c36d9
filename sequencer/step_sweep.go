package sequencer

// The sweep step: stepping a source across a range (or a list of levels) and
// reading a meter at each level.

import (
	"context"
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"

	"trimline/instruments"
	"trimline/instruments/units"
)

func init() {
	RegisterStep(StepKind{Name: "sweep", PerChannel: true, About: "steps a source across a range or a list of levels, settles, and takes readings at each",
		New: func() Step { return new(sweepStep) }})
}

// SweepPlan is one pass across the input range.
type SweepPlan struct {
	From, To float64 // stimulus, volts (amperes when Stimulus is units.Ampere)
	// Stimulus is what the levels are: units.Volt (0 too) programmed on a
	// voltage source, or units.Ampere on a current source.
	Stimulus units.Dim
	// Points is the number of levels, evenly spaced, From first: at least 3 (the
	// loader refuses fewer; a line through 2 points has no residual to judge).
	Points int
	// List, when not nil, is the levels in the order they are programmed, in Stimulus;
	// From, To and Points then describe it (first, last, count).
	List     []float64
	Settle   time.Duration // wait after each level change before reading
	Readings int           // readings per level
	Source   string        // the source role that programs the levels
	Meter    string        // the meter role that reads the output; "" when Response is set
	MeterSet MeterPlan     // the meter's function, range and integration time for this sweep
	// Response, when set, is the unit reporting its own response (the DUT as the
	// meter): each reading is its reply to a query.
	Response *ResponsePlan
	// Quantity is what the readings are: units.Volt, units.Ampere or units.Count.
	Quantity units.Dim
	Where    string // "file:line:col" of the sweep in the sequence file, for messages
	// zero is the zero check a run applies to the sweep's fits: set on the
	// plan a sweep keeps (Unit.withZero), nil in the file's plan.
	zero *zeroKept
}

// ResponsePlan is a unit that reports its own response: each reading is the
// reply of the DUT port Port to Query ({channel} filled) read as a number in
// the response's SI unit.
type ResponsePlan struct {
	Port       string
	Query      string
	Resolution float64 // one step of the reported number, in the response's unit
}

// responseDecl is response: as a sequence file writes it.
type responseDecl struct {
	Port       string          `yaml:"port"`
	Query      string          `yaml:"query"`
	Resolution *units.Quantity `yaml:"resolution"`
}

// stimDim is the dimension of the plan's levels: units.Volt unless they are
// currents.
func (p SweepPlan) stimDim() units.Dim {
	if p.Stimulus == units.Ampere {
		return units.Ampere
	}
	return units.Volt
}

// Levels returns the stimulus levels in SI units (volts, or amperes). For an even sweep, From to To
// inclusive: the first is exactly From and the last exactly To, and none lies
// outside them, so a cap that holds at both ends holds at every level. It is the
// one computation of the levels: the sweep programs them, and the caps check, the
// TUR prediction and the physical ranges read them.
func (p SweepPlan) Levels() []float64 {
	if p.List != nil {
		return append([]float64(nil), p.List...)
	}
	if p.Points < 1 {
		return nil
	}
	out := make([]float64, p.Points)
	lo, hi := min(p.From, p.To), max(p.From, p.To)
	for i := range out {
		// (1−t)·From + t·To is From at t = 0 and To at t = 1 exactly, and
		// symmetric sweeps land on 0 exactly; the clamp keeps a rounding of the
		// products from stepping a hair past either end.
		t := float64(i) / float64(p.Points-1)
		out[i] = min(max((1-t)*p.From+t*p.To, lo), hi)
	}
	if p.Points == 1 {
		out[0] = p.From
	}
	return out
}

// sweepStep is a sweep as the sequence file writes it.
type sweepStep struct {
	From      *level          `yaml:"from"`
	To        *level          `yaml:"to"`
	Points    int             `yaml:"points"`
	Levels    []level         `yaml:"levels"`
	Settle    *units.Duration `yaml:"settle"`
	Readings  int             `yaml:"readings"`
	Source    string          `yaml:"source"`
	Meter     string          `yaml:"meter"`
	Response  *responseDecl   `yaml:"response"`
	Stage     string          `yaml:"stage"`
	MeterSet  *units.Quantity `yaml:"meter_range"`
	NPLC      *float64        `yaml:"nplc"`
	Plan      SweepPlan       `yaml:"-"`
	legacyKey string          // the first layout's key (pre_trim, verify), for messages
}

var _ Stimulator = (*sweepStep)(nil)

// sweepKept is what a sweep leaves for later steps.
type sweepKept struct {
	sweep Sweep
	plan  SweepPlan
}

func (s *sweepStep) Check(c *Checker) {
	var p SweepPlan
	inBounds := checkReadings(c, readingKeys{source: s.Source, meter: s.Meter, response: s.Response, quantity: c.Sequence().ResponseDim,
		stage: s.Stage, meterRange: s.MeterSet, nplc: s.NPLC, settle: s.Settle, readings: s.Readings}, 1, "1 reading per point", &p)
	if s.Levels != nil {
		if s.From != nil || s.To != nil || s.Points != 0 {
			c.Errorf("levels", "give either levels or from, to and points, not both")
		}
		levelsOK := true
		for i, l := range s.Levels {
			v, ok := c.level(fmt.Sprintf("levels[%d]", i), l)
			p.List = append(p.List, v)
			levelsOK = levelsOK && ok
		}
		if len(p.List) > 0 {
			p.From, p.To = p.List[0], p.List[len(p.List)-1]
		}
		if p.Points = len(p.List); p.Points < MinPoints {
			c.Errorf("levels", "expected at least %d levels, found %d (a line through 2 points has no residual to judge)", MinPoints, p.Points)
		} else if p.Points > MaxPoints {
			c.Errorf("levels", "expected at most %d levels, found %d", MaxPoints, p.Points)
		}
		if !levelsOK {
			p.List, p.Points = nil, 0 // refused: no later check may use its levels
		}
	} else {
		fromOK, toOK := false, false
		if s.From == nil {
			c.Errorf("", "missing required key \"from\"")
		} else {
			p.From, fromOK = c.level("from", *s.From)
		}
		if s.To == nil {
			c.Errorf("", "missing required key \"to\"")
		} else {
			p.To, toOK = c.level("to", *s.To)
		}
		if fromOK && toOK && p.From == p.To {
			c.Errorf("to", "expected \"to\" to differ from \"from\"")
		}
		p.Points = s.Points
		if p.Points < MinPoints {
			c.Errorf("points", "expected at least %d points, found %d (a line through 2 points has no residual to judge)", MinPoints, s.Points)
		} else if p.Points > MaxPoints {
			c.Errorf("points", "expected at most %d points, found %d", MaxPoints, s.Points)
			p.Points = 0 // refused: no later check may make its levels
		}
		if !fromOK || !toOK {
			p.Points = 0 // refused: no later check may make its levels
		}
	}
	if inBounds && p.Points >= MinPoints && p.Points <= MaxPoints {
		if n := p.Points * p.Readings; n > MaxSweepReadings {
			c.Errorf("", "expected at most %d readings in a sweep: %d points × %d readings is %d", MaxSweepReadings, p.Points, p.Readings, n)
		} else if t := sweepTime(p); t > MaxSweepTime {
			c.Errorf("", "expected a sweep of at most %s: %d points × (settle %s + %d readings × %g PLC at 50 Hz) is %s",
				MaxSweepTime, p.Points, p.Settle, p.Readings, p.MeterSet.NPLC, t.Round(time.Second))
		}
	}
	s.Plan = p
}

// Stimuli are the sweep's levels on its source.
func (s *sweepStep) Stimuli() []Stimulus { return s.Plan.stimuli() }

// stimuli are the plan's levels on its source, for the caps check.
func (p SweepPlan) stimuli() []Stimulus {
	var out []Stimulus
	for _, v := range p.Levels() {
		out = append(out, Stimulus{Role: p.Source, Level: v, Dim: p.stimDim()})
	}
	return out
}

func (s *sweepStep) Run(ctx context.Context, u *Unit) error {
	name := u.step.Name
	var sw Sweep
	if u.Predicting() { // a unit with exactly the ideal transfer, one noiseless reading a level
		sw = idealSweep(u.seq, name, s.Plan.Levels())
		sw.Channel, sw.Stage = u.channel, u.step.Stage
		annotate(u.cfg, s.Plan, &sw)
		sw = u.addSweep(sw)
	} else {
		var ok bool
		var err error
		if sw, ok, err = takeSweep(ctx, u, name, s.Plan, u.step.Stage); err != nil {
			return err
		}
		if !ok {
			u.End("") // the recorded run ended before this sweep
			return nil
		}
	}
	u.Keep(sweepKept{sweep: sw, plan: u.withZero(s.Plan)})
	return nil
}

// readingKeys are the keys a sweep and a measure step share, as written, and
// the quantity the step reads.
type readingKeys struct {
	source, meter, stage string
	response             *responseDecl
	quantity             units.Dim
	quantityKey          string // the key that set quantity, "" for the response's
	meterRange           *units.Quantity
	nplc                 *float64
	settle               *units.Duration
	readings             int
}

// checkReadings checks the shared keys into p: the roles, the stage, the meter's
// settings, the settle time and the readings at each level, at least minReadings
// (fewer is refused with why). It reports whether every value checked is in
// bounds, so that the caller's own bounds on the whole step may be computed.
func checkReadings(c *Checker, k readingKeys, minReadings int, why string, p *SweepPlan) bool {
	seq := c.Sequence()
	p.Source, p.Settle, p.MeterSet, p.Where, p.Quantity = orDefault(k.source, RoleSource), -1, seq.Meter, c.Where(), k.quantity
	p.Stimulus = seq.stimDim()
	c.Use(p.Source, seq.sourceKind())
	checkReader(c, k, p)
	switch k.stage {
	case "":
	case "as_found":
		c.SetStage(AsFound)
	case "as_left":
		c.SetStage(AsLeft)
	default:
		c.Errorf("stage", "expected as_found or as_left, found %q", k.stage)
	}
	if k.nplc != nil {
		if p.MeterSet.NPLC = *k.nplc; !(p.MeterSet.NPLC > 0 && p.MeterSet.NPLC <= MaxNPLC) {
			c.Errorf("nplc", "expected an integration time above 0 and at most %d power-line cycles, found %g", MaxNPLC, p.MeterSet.NPLC)
		}
	}
	if k.settle == nil {
		c.Errorf("", "missing required key \"settle\" (e.g. 20ms)")
	} else if p.Settle = k.settle.D(); p.Settle < 0 {
		c.Errorf("settle", "expected a settle time ≥ 0")
	} else if p.Settle > MaxSettle {
		c.Errorf("settle", "expected a settle time of at most %s, found %s", MaxSettle, p.Settle)
	}
	p.Readings = k.readings
	if p.Readings < minReadings {
		c.Errorf("readings", "expected at least %s, found %d", why, k.readings)
	} else if p.Readings > MaxReadings {
		c.Errorf("readings", "expected at most %d readings per point, found %d", MaxReadings, k.readings)
	}
	return p.Readings >= minReadings && p.Readings <= MaxReadings && p.Settle >= 0 && p.Settle <= MaxSettle &&
		p.MeterSet.NPLC > 0 && p.MeterSet.NPLC <= MaxNPLC
}

// checkReader checks what reads the step's quantity into p: a meter role set to
// the quantity's function, or the unit itself (response:).
func checkReader(c *Checker, k readingKeys, p *SweepPlan) {
	seq := c.Sequence()
	if r := k.response; r != nil {
		if k.meter != "" {
			c.Errorf("response", "give either meter or response (the unit reporting its own response), not both")
		}
		if k.meterRange != nil {
			c.Errorf("meter_range", "meter_range sets a meter: this step reads the unit's own reports (response:)")
		}
		if k.quantity != seq.ResponseDim {
			c.Errorf("response", "the unit reports its response, a %s; a %s is read through a meter role (meter:)", seq.ResponseDim, k.quantity)
		}
		rp := &ResponsePlan{Port: orDefault(r.Port, RoleDUT), Query: r.Query}
		c.Use(rp.Port, DUTPort)
		if strings.TrimSpace(r.Query) == "" {
			c.Errorf("response", "missing required key \"query\" (what the unit answers with its reading, e.g. \"MEAS?\")")
		}
		switch q := r.Resolution; {
		case q == nil:
			c.Errorf("response", "missing required key \"resolution\" (one step of the number the unit reports, e.g. %s)", oneStep(seq.ResponseDim))
		case q.Dim != seq.ResponseDim:
			c.Errorf("response.resolution", "expected a %s, the response's unit (e.g. %s), found a %s", seq.ResponseDim, oneStep(seq.ResponseDim), q.Dim)
		case !(q.Value > 0):
			c.Errorf("response.resolution", "expected a positive resolution, e.g. %s", oneStep(seq.ResponseDim))
		default:
			rp.Resolution = q.Value
		}
		p.Response = rp
		return
	}
	p.Meter = orDefault(k.meter, RoleMeter)
	c.Use(p.Meter, VoltMeter)
	switch k.quantity {
	case units.Volt:
		p.MeterSet.Function = instruments.FuncVoltage
	case units.Ampere:
		p.MeterSet.Function = instruments.FuncCurrent
	default:
		key := k.quantityKey
		if key == "" {
			key = "meter"
		}
		c.Errorf(key, "a meter reads volts or amperes: the unit's response is a %s it reports itself; read it with response: {port: dut, query: \"MEAS?\", resolution: 1 count}", k.quantity)
		return
	}
	if seq.Meter.dim() != k.quantity {
		p.MeterSet.Range = 0 // the file's meter range is for the other function
	}
	if q := k.meterRange; q != nil {
		if q.Dim != k.quantity {
			c.Errorf("meter_range", "expected a range in the unit of the %s the step reads (e.g. %s), found a %s", k.quantity, oneStep(k.quantity), q.Dim)
		}
		p.MeterSet.Range = q.Value
	}
}

// oneStep is an example quantity of dimension d for messages.
func oneStep(d units.Dim) string {
	switch d {
	case units.Ampere:
		return "100 mA"
	case units.Count:
		return "1 count"
	}
	return "10 V"
}

// storedSweep finds the sweep called name of channel ch ("" for the whole unit)
// in a stored record.
func storedSweep(rec *Record, name, ch string) (Sweep, bool) {
	for _, s := range rec.Sweeps {
		if s.Name == name && s.Channel == ch {
			return s, true
		}
	}
	return Sweep{}, false
}

// takeSweep takes the sweep name of plan on the unit's channel, marked with
// stage: on the bench, or rebuilt from the stored record's readings in a replay.
// It annotates the sweep and adds it to the record. ok is false when a replayed
// record has no such sweep (nothing is added); a bench error comes back after
// the readings taken before it are recorded. A sweep step and each pass of a
// re-trim take their readings through it.
func takeSweep(ctx context.Context, u *Unit, name string, plan SweepPlan, stage Stage) (sw Sweep, ok bool, err error) {
	if u.Live() {
		sw, err = u.e.sweep(ctx, u, name, plan)
		sw.Stage, sw.Channel = stage, u.channel
		annotate(u.cfg, plan, &sw)
		sw = u.addSweep(sw)
		return sw, err == nil, err
	}
	stored, ok := storedSweep(u.stored, name, u.channel)
	if !ok {
		return Sweep{}, false, nil
	}
	sw = Sweep{Name: name, Channel: u.channel, Stage: stage, TempC: stored.TempC, TempKnown: stored.TempKnown}
	for _, p := range stored.Points {
		sw.Points = append(sw.Points, point(p.Stimulus, p.Readings))
	}
	annotate(u.cfg, plan, &sw)
	sw = u.addSweep(sw)
	return sw, true, nil
}

// idealSweep is a sweep on paper: a unit with exactly the ideal transfer and
// one noiseless reading at each level.
func idealSweep(seq *Sequence, name string, levels []float64) Sweep {
	sw := Sweep{Name: name}
	for _, x := range levels {
		sw.Points = append(sw.Points, Point{Stimulus: x, Mean: seq.IdealGain*x + seq.IdealOffset, Valid: 1, Readings: make([]instruments.Reading, 1)})
	}
	return sw
}

// sweep steps the source across p and reads the meter at each level. The output is
// switched on after the first level is programmed and off again at the end. After
// each point's readings every instrument's error queue is read: an entry (say, a
// meter that flags its reading as stale) stops the run as a station fault.
func (e *Engine) sweep(ctx context.Context, u *Unit, name string, p SweepPlan) (Sweep, error) {
	sw := Sweep{Name: name}
	src := e.sources[p.Source]
	if p.Response == nil {
		if err := e.configureMeter(ctx, p.Meter, p.MeterSet); err != nil {
			return sw, err
		}
	}
	for i, x := range p.Levels() {
		err := e.step(ctx, func(ctx context.Context) error {
			if err := e.checkInterlock(ctx); err != nil {
				return err
			}
			if err := e.setLevel(ctx, p.Source, x); err != nil {
				return err
			}
			if i == 0 {
				if err := src.SetOutput(ctx, true); err != nil {
					return e.blame(p.Source, err.Error(), fmt.Errorf("%s sweep: source output on: %w", name, err))
				}
			}
			if err := e.clock.Sleep(ctx, p.Settle); err != nil {
				return err
			}
			rs, err := e.readings(ctx, u, p, func() string { return fmt.Sprintf("%s sweep at %s", name, fmtStim(p.Stimulus, x)) })
			if err != nil {
				return err
			}
			sw.Points = append(sw.Points, point(x, rs))
			// The unit's output cannot leave its supply rails, so an overload or
			// not-a-number on the meter's range is the station's problem (range,
			// wiring, a failing meter), not a measurement of the unit.
			for j, r := range rs {
				if !r.Valid() {
					return e.blame(p.Meter, "reported "+firstBad(rs[j:j+1]), &stop{verdict: Fault, msg: fmt.Sprintf("%s sweep at %s: meter reported %s (reading %d of %d): check the meter range and the wiring",
						name, fmtStim(p.Stimulus, x), firstBad(rs[j:j+1]), j+1, len(rs))})
				}
			}
			return e.checkErrors(ctx, func() string { return fmt.Sprintf("%s sweep at %s", name, fmtStim(p.Stimulus, x)) })
		})
		if err != nil {
			return sw, err
		}
		u.log.Debug().Str("sweep", name).Float64("x", x).Float64("y", sw.Points[i].Mean).Msg("point")
		u.emitPoint(x, sw.Points[i].Mean, u.seq.IdealGain*x+u.seq.IdealOffset)
	}
	if err := e.step(ctx, func(ctx context.Context) error { return src.SetOutput(ctx, false) }); err != nil {
		return sw, e.blame(p.Source, "", fmt.Errorf("%s sweep: source output off: %w", name, err))
	}
	return sw, nil
}

// readings takes p.Readings readings of the step's quantity: from its meter
// (configured to p.MeterSet), or with p.Response the unit's replies to its query,
// each stamped with the engine's clock. A reply that is no number stops the run
// as a station fault naming where (the step and level) and the reply.
func (e *Engine) readings(ctx context.Context, u *Unit, p SweepPlan, where func() string) ([]instruments.Reading, error) {
	r := p.Response
	if r == nil {
		if err := e.configureMeter(ctx, p.Meter, p.MeterSet); err != nil {
			return nil, err
		}
		rs, err := e.meters[p.Meter].Read(ctx, p.Readings)
		if err != nil {
			return nil, e.blame(p.Meter, err.Error(), fmt.Errorf("%s: read meter: %w", where(), err))
		}
		return rs, nil
	}
	port, ok := e.ports[r.Port]
	if !ok {
		return nil, fmt.Errorf("%s: %s is not a DUT port", where(), r.Port)
	}
	q := u.Fill(r.Query)
	rs := make([]instruments.Reading, 0, p.Readings)
	for i := range p.Readings {
		reply, err := port.Query(ctx, q)
		if err != nil {
			return nil, e.blame(r.Port, err.Error(), fmt.Errorf("%s: read the unit (%q on %s): %w", where(), q, r.Port, err))
		}
		v, err := strconv.ParseFloat(strings.TrimSpace(reply), 64)
		if err != nil || !finite(v) {
			return nil, &stop{verdict: Fault, msg: fmt.Sprintf("%s: the unit answered %q to %q (reading %d of %d), which is no number: check the unit's protocol and the query",
				where(), reply, q, i+1, p.Readings)}
		}
		rs = append(rs, instruments.Reading{Value: v, Time: e.clock.Now()})
	}
	return rs, nil
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

func orDefault(s, def string) string {
	if s == "" {
		return def
	}
	return s
}
