package sequencer

// The fit step: a straight line (or a quadratic) through an earlier sweep's
// points, with its uncertainty, and the results the file names from it.

import (
	"context"
	"fmt"
	"math"
	"slices"
	"sort"
	"strings"

	"trimline/instruments/units"
	"trimline/sequencer/uncertainty"
)

func init() {
	RegisterStep(StepKind{Name: "fit", PerChannel: true, About: "fits a line (order 1) or a quadratic (order 2) through an earlier sweep, optionally over a window of its levels, and names the results",
		New: func() Step { return new(fitStep) }})
}

// The results a fit can give, as a fit step's results: map names them.
var fitOutputs = map[string]struct {
	dim   units.Dim
	about string
	rng   func(f *fitStep) func(*Sequence) (float64, float64, bool)
}{
	// Two offsets, two measurands: the best-fit line's output at zero input (the
	// intercept, what offset meant from the start) and the output measured at
	// the zero-input level (the terminal offset). They differ wherever the
	// transfer is not a straight line.
	"offset":          {units.Volt, "best-fit-line offset: the fitted line's output at zero input − ideal offset, V", func(*fitStep) func(*Sequence) (float64, float64, bool) { return outputError }},
	"line_offset":     {units.Volt, "best-fit-line offset (the same as offset), V", func(*fitStep) func(*Sequence) (float64, float64, bool) { return outputError }},
	"terminal_offset": {units.Volt, "terminal offset: mean output measured at the zero-input level − ideal offset, V", func(*fitStep) func(*Sequence) (float64, float64, bool) { return outputError }},
	"gain_error":      {units.Ratio, "slope/ideal − 1, fraction", func(*fitStep) func(*Sequence) (float64, float64, bool) { return fixedRange(-1, 1) }},
	"nonlinearity":    {units.Ratio, "max |residual| / full scale, fraction", func(*fitStep) func(*Sequence) (float64, float64, bool) { return fixedRange(0, 1) }},
	"max_error":       {units.Volt, "max |mean − ideal| over the fitted levels, V", func(f *fitStep) func(*Sequence) (float64, float64, bool) { return f.maxErrorRange }},
	"noise":           {units.Volt, "pooled standard deviation of the readings, V rms", func(*fitStep) func(*Sequence) (float64, float64, bool) { return noiseRange }},
	"lack_of_fit":     {units.Number, "χ²/ν of the residuals against the points' uncertainties, or F against pure error where levels repeat", func(*fitStep) func(*Sequence) (float64, float64, bool) { return nil }},
	"lack_of_fit_p":   {units.Ratio, "probability of a lack-of-fit statistic this large from a model that fits, fraction", func(*fitStep) func(*Sequence) (float64, float64, bool) { return fixedRange(0, 1) }},
	// The trim's effect: the change from the fit named by baseline (trimeffect.go).
	"offset_change": {units.Volt, "offset now − offset at the baseline fit (the trim's effect on the fitted line's offset), V", func(*fitStep) func(*Sequence) (float64, float64, bool) { return nil }},
	"gain_change":   {units.Ratio, "gain error now − gain error at the baseline fit (the trim's effect on the slope), fraction", func(*fitStep) func(*Sequence) (float64, float64, bool) { return nil }},
}

// fitStep is a fit as the sequence file writes it.
type fitStep struct {
	Sweep  string `yaml:"sweep"`
	Order  int    `yaml:"order"`
	Window *struct {
		From *level `yaml:"from"`
		To   *level `yaml:"to"`
	} `yaml:"window"`
	Results map[string]string `yaml:"results"`
	// Random is where the random part of the line's uncertainty comes from:
	// "readings" (the default: the readings' pooled standard deviation) or
	// "residuals" (the residual scatter about the line, JCGM 100 H.3).
	Random string `yaml:"random"`
	// Baseline names an earlier fit step whose line the results offset_change
	// and gain_change are the change from (trimeffect.go).
	Baseline string `yaml:"baseline"`

	base   *fitStep // the baseline fit, when Baseline names one
	order  []string // the order of Results' keys when not read from a file
	sweep  *sweepStep
	lo, hi float64     // window, stimulus in SI units (±Inf = none)
	outs   [][2]string // (what, result name), in the file's order
	// hasZero says the fitted levels include zero input (a terminal offset
	// can be measured).
	hasZero bool
}

// fitKept is what a fit leaves for later steps.
type fitKept struct {
	a analysis
	// zero is the fitted sweep's point at zero input (the readings of every
	// zero level pooled), nil when the fitted levels have none; term the output
	// at a true zero input made from it (terminalAt).
	zero *Point
	term *terminal
}

// terminal is the output at a true zero input, y0 (response unit), with its
// standard uncertainty, degrees of freedom and budget.
type terminal struct {
	y0, std, dof float64
	rows         []BudgetRow
}

// terminalAt is the output at a true zero input from the fitted sweep's
// zero-level point p: its mean, and where a zero check found that the station
// delivers ô_s at a programmed 0 (and the fit applied it), less the slope's
// share b1·ô_s; its uncertainty is the point's own (pointErrorU), with the
// check's Type A u in place of the source's offset spec.
func terminalAt(cfg Config, plan SweepPlan, a analysis, p Point) terminal {
	z := plan.zero
	if a.sum.SourceZero == "" || z == nil {
		std, dof := pointErrorU(p, a.poolDOF)
		return terminal{y0: p.Mean, std: std, dof: dof, rows: pointBudget(cfg, plan, p, a.poolDOF, true, nil)}
	}
	rows := pointBudget(cfg, plan, p, a.poolDOF, true, &uncertainty.Measured{U: z.u, DOF: z.dof, Kind: z.kind})
	cs := make([]uncertainty.Component, len(rows))
	for i, r := range rows {
		cs[i] = uncertainty.Component{Name: r.Name, U: r.U, DOF: r.DOF, Kind: r.Kind}
	}
	std, dof := uncertainty.Combine(cs)
	return terminal{y0: p.Mean - a.sum.Slope*z.offset, std: std, dof: dof, rows: rows}
}

// Where a fit's random uncertainty comes from (fitStep.Random).
const (
	RandomReadings  = "readings"
	RandomResiduals = "residuals"
)

func (f *fitStep) Check(c *Checker) {
	if f.Sweep == "" {
		c.Errorf("", "missing required key \"sweep\" (the name of an earlier sweep step)")
	} else if d := c.Earlier("sweep", f.Sweep, "sweep"); d != nil {
		f.sweep = d.Step.(*sweepStep)
		c.SetStage(d.Stage)
	}
	switch f.Order {
	case 0:
		f.Order = 1
	case 1:
	case 2:
		if c.Sequence().Uncertainty == "monte_carlo" {
			c.Errorf("order", "an order-2 fit's uncertainty is evaluated by the law of propagation (JCGM 100) only: use order 1 or uncertainty method gum")
		}
	default:
		c.Errorf("order", "expected order 1 (a straight line) or 2 (a quadratic), found %d", f.Order)
	}
	switch f.Random {
	case "":
		f.Random = RandomReadings
	case RandomReadings:
	case RandomResiduals:
		if f.Order == 2 {
			c.Errorf("random", "random: residuals takes a straight line's uncertainty from its residuals (JCGM 100 H.3): use order 1")
		}
		if c.Sequence().Uncertainty == "monte_carlo" {
			c.Errorf("random", "random: residuals is evaluated by the law of propagation (JCGM 100 H.3) only: use uncertainty method gum or random: readings")
		}
	default:
		c.Errorf("random", "expected readings (the readings' pooled standard deviation) or residuals (the scatter about the line, JCGM 100 H.3), found %q", f.Random)
	}
	f.lo, f.hi = math.Inf(-1), math.Inf(1)
	if w := f.Window; w != nil {
		if w.From == nil || w.To == nil {
			c.Errorf("window", "expected from and to: the stimulus levels the fit uses, inclusive")
		} else {
			from, ok1 := c.level("window.from", *w.From)
			to, ok2 := c.level("window.to", *w.To)
			if ok1 && ok2 {
				f.lo, f.hi = min(from, to), max(from, to)
			}
		}
	}
	// A sweep refused already (too few points) is not reported again: its
	// levels count as holding zero.
	f.hasZero = f.sweep == nil || f.sweep.Plan.Points < MinPoints
	if f.sweep != nil {
		for _, x := range f.sweep.Plan.Levels() {
			f.hasZero = f.hasZero || x == 0 && x >= f.lo && x <= f.hi
		}
	}
	if f.sweep != nil && f.Order >= 1 && f.Order <= 2 && f.sweep.Plan.Points >= MinPoints { // a sweep refused already is not counted again
		// A curve through as many distinct levels as it has coefficients fits them
		// exactly: its residuals, nonlinearity and lack of fit would mean nothing.
		distinct := map[float64]bool{}
		for _, x := range f.sweep.Plan.Levels() {
			if x >= f.lo && x <= f.hi {
				distinct[x] = true
			}
		}
		if n := len(distinct); n < f.Order+2 {
			key, where := "order", "the sweep has"
			if f.Window != nil {
				key, where = "window", "the window holds"
			}
			c.Errorf(key, "%s %d distinct levels: an order-%d fit needs at least %d to leave a residual to judge", where, n, f.Order, f.Order+2)
		}
	}
	if f.Baseline != "" {
		if d := c.Earlier("baseline", f.Baseline, "fit"); d != nil {
			f.base = d.Step.(*fitStep)
		}
	}
	if len(f.Results) == 0 {
		c.Errorf("", "missing required key \"results\": name what the fit gives (%s), e.g. results: {offset: pre_offset}", keysText(fitOutputs))
	}
	for _, what := range orderedKeys(c, "results", f.Results, f.order) {
		name := f.Results[what]
		o, ok := fitOutputs[what]
		if !ok {
			c.Errorf("results."+what, "unknown fit result %q (expected one of %s)", what, keysText(fitOutputs))
			continue
		}
		if what == "terminal_offset" && !f.hasZero {
			c.Errorf("results."+what, "the terminal offset is the output measured at zero input: expected a level of 0 %s in %s", unitOf(c.Sequence().stimDim()), f.levelsText())
		}
		if _, change := trimEffectGradient(what, 1); change && f.Baseline == "" {
			c.Errorf("results."+what, "%s is the change from an earlier fit: name it with baseline: <fit step>", what)
		}
		dim, about := o.dim, o.about
		if dim == units.Volt { // in the response's unit: V, A or count
			dim = c.Sequence().ResponseDim
			about = strings.Replace(about, ", V", ", "+unitOf(dim), 1)
		}
		quantity := what
		if what == "line_offset" {
			quantity = "offset" // one measurand, two names
		}
		c.Declare("results."+what, ResultDef{Name: name, Dim: dim, Quantity: quantity, About: about, Range: o.rng(f)})
		f.outs = append(f.outs, [2]string{what, name})
	}
}

// orderedKeys returns the keys of m in the order the file writes them under key,
// or, for a step not read from a file, in the order given (the first layout
// builds its steps in Go).
func orderedKeys(c *Checker, key string, m map[string]string, given []string) []string {
	if given != nil {
		return given
	}
	var out []string
	for _, k := range c.doc.Keys(c.path + "." + key) {
		if _, ok := m[k]; ok {
			out = append(out, k)
		}
	}
	return out
}

func (f *fitStep) Run(_ context.Context, u *Unit) error {
	kept, ok := u.Kept(f.Sweep).(sweepKept)
	if !ok {
		for _, o := range f.outs {
			u.Invalid(o[1], fmt.Sprintf("sweep %q was not run", f.Sweep))
		}
		return nil
	}
	sw := kept.sweep
	if !math.IsInf(f.lo, -1) || !math.IsInf(f.hi, 1) {
		var in []Point
		for _, p := range sw.Points {
			if p.Stimulus >= f.lo && p.Stimulus <= f.hi {
				in = append(in, p)
			}
		}
		sw.Points = in
	}
	a, err := analyse(u.cfg, kept.plan, sw, f.Order, u.Rec.RunID, u.Metrology())
	if err != nil {
		note := fmt.Sprintf("%s sweep: %v", f.Sweep, err)
		for _, o := range f.outs {
			u.Invalid(o[1], note)
		}
		u.End(note)
		return nil
	}
	if f.Random == RandomResiduals {
		if err := a.fromResiduals(u.seq.FullScale); err != nil {
			note := fmt.Sprintf("%s sweep: residual uncertainty: %v", f.Sweep, err)
			for _, o := range f.outs {
				u.Invalid(o[1], note)
			}
			u.End(note)
			return nil
		}
	}
	a.sum.Step, a.sum.Channel = u.step.Name, u.channel
	if lof := a.sum.LackOfFit; lof != nil && u.Metrology() >= 1 {
		lof.judge()
	}
	u.Rec.Fits = append(u.Rec.Fits, a.sum)
	zero, hasZero := zeroPoint(sw.Points)
	fk := fitKept{a: a.lean()}
	if hasZero {
		t := terminalAt(u.cfg, kept.plan, a, zero)
		fk.zero, fk.term = &zero, &t
	}
	u.Keep(fk)
	seq := u.seq
	for _, o := range f.outs {
		switch name := o[1]; o[0] {
		case "offset", "line_offset":
			uo, do := a.linear([2]float64{1, 0})
			u.SetU(name, a.sum.Intercept-seq.IdealOffset, a.unc(u, [2]float64{1, 0}, -seq.IdealOffset, uo, do))
			u.SetBudget(name, a.budget([2]float64{1, 0}, kept.plan, seq))
		case "terminal_offset":
			// The output measured at zero input, with that point's own
			// uncertainty: its Type A part from the pooled standard deviation
			// (poolDOF degrees of freedom) and the meter and source specs there;
			// after a zero check, at a true zero input (terminalAt).
			if !hasZero {
				u.Invalid(name, "no point at zero input")
				continue
			}
			t := fk.term
			u.SetU(name, t.y0-seq.IdealOffset, u.Unc(t.std, t.dof))
			u.SetBudget(name, t.rows)
		case "gain_error":
			ug, dg := a.linear([2]float64{0, 1 / seq.IdealGain})
			u.SetU(name, a.sum.Slope/seq.IdealGain-1, a.unc(u, [2]float64{0, 1 / seq.IdealGain}, -1, math.Abs(ug), dg))
			u.SetBudget(name, a.budget([2]float64{0, 1 / seq.IdealGain}, kept.plan, seq))
		case "nonlinearity":
			if u.Metrology() >= 1 {
				setMaxU(u, name, a, a.poolDOF, func(seed string) (float64, float64, float64, MaxUnc, error) {
					return nonlinearityMC(a, f.Order, seq.FullScale, coverage(seq), seed)
				})
				continue
			}
			// Revision 0: the largest residual, with that residual's own
			// uncertainty (random part only: shared gain and offset errors do not
			// bend the line).
			ru := make([]float64, len(a.sw.X))
			for i := range ru {
				ru[i] = math.Hypot(a.sw.URandom[i], a.sw.MeterResolution/(2*math.Sqrt(3)))
			}
			imax := 0
			for i, r := range a.sum.Residuals {
				if math.Abs(r) > math.Abs(a.sum.Residuals[imax]) {
					imax = i
				}
			}
			var un, dn float64
			if ur := uncertainty.ResidualU(a.sw.X, ru); len(ur) > imax && !math.IsNaN(ur[imax]) {
				un, dn = ur[imax]/seq.FullScale, a.poolDOF
			}
			u.SetU(name, a.sum.Nonlinearity, u.Unc(un, dn))
		case "max_error":
			if u.Metrology() >= 1 {
				v, su, U, mu, imax := maxErrorMC(a, seq.IdealGain, seq.IdealOffset, coverage(seq), maxSeed(u, name, a))
				_, dof := pointErrorU(sw.Points[imax], a.poolDOF)
				setMaxU(u, name, a, dof, func(string) (float64, float64, float64, MaxUnc, error) { return v, su, U, mu, nil })
				continue
			}
			// Revision 0: the largest deviation from the ideal transfer, with that
			// point's own uncertainty (on paper, where every deviation is 0, the
			// largest uncertainty).
			dev := func(p Point) float64 { return math.Abs(p.Mean - (seq.IdealGain*p.Stimulus + seq.IdealOffset)) }
			imax := 0
			for i, p := range sw.Points {
				if dev(p) > dev(sw.Points[imax]) {
					imax = i
				}
			}
			if u.Predicting() {
				best := -1.0
				for i, p := range sw.Points {
					if pu, _ := pointErrorU(p, math.Inf(1)); pu > best {
						best, imax = pu, i
					}
				}
			}
			pu, dof := pointErrorU(sw.Points[imax], a.poolDOF)
			u.SetU(name, dev(sw.Points[imax]), u.Unc(pu, dof))
		case "offset_change", "gain_change":
			f.setTrimEffect(u, o[0], name, a)
		case "noise":
			// The pooled standard deviation of the readings, with u(s) ≈ s/√(2ν)
			// (JCGM 100 E.4.3).
			if sp, nu := pooledSD(sw.Points); nu > 0 {
				u.SetU(name, sp, u.Unc(sp/math.Sqrt(2*nu), nu))
			} else {
				u.Invalid(name, "one reading per point: no noise estimate")
			}
		case "lack_of_fit":
			if lof := a.sum.LackOfFit; lof != nil && finite(lof.Statistic) {
				u.Set(name, lof.Statistic)
			} else {
				u.Invalid(name, "no lack-of-fit statistic: the points carry no random uncertainty")
			}
		case "lack_of_fit_p":
			if lof := a.sum.LackOfFit; lof != nil && finite(lof.P) {
				u.Set(name, lof.P)
			} else {
				u.Invalid(name, "no lack-of-fit statistic: the points carry no random uncertainty")
			}
		}
	}
	return nil
}

// levelsText names the levels a fit uses, for a message: "sweep "pre" (-10 mV …
// 10 mV, 11 points)" or "the window 1 mV … 10 mV of sweep "pre"".
func (f *fitStep) levelsText() string {
	ls := f.sweep.Plan.Levels()
	if len(ls) == 0 {
		return fmt.Sprintf("sweep %q", f.Sweep)
	}
	lo, hi := slices.Min(ls), slices.Max(ls)
	text := func(v float64) string { return fmtStim(f.sweep.Plan.stimDim(), v) }
	if f.Window != nil {
		return fmt.Sprintf("the window %s … %s of sweep %q", text(f.lo), text(f.hi), f.Sweep)
	}
	return fmt.Sprintf("sweep %q (%s … %s, %d levels)", f.Sweep, text(lo), text(hi), len(ls))
}

// zeroPoint is the sweep's point at zero input: the readings of every point at
// a programmed 0 taken together (their mean weighted by the number of valid
// readings, the Type A uncertainty of that mean from the pooled standard
// deviation, the systematic part of the first: the same instruments at the same
// level), or false when no point is at 0.
func zeroPoint(ps []Point) (Point, bool) {
	var out Point
	var n int
	var sum, invVar float64
	for _, p := range ps {
		if p.Stimulus != 0 || p.Valid == 0 {
			continue
		}
		if n == 0 {
			out = p
		}
		n += p.Valid
		sum += p.Mean * float64(p.Valid)
		if p.URandom > 0 {
			invVar += 1 / (p.URandom * p.URandom)
		}
		out.USys = math.Max(out.USys, p.USys)
	}
	if n == 0 {
		return Point{}, false
	}
	if n != out.Valid { // more than one zero level
		out.Mean, out.Valid, out.Readings = sum/float64(n), n, nil
		out.URandom = 0
		if invVar > 0 {
			out.URandom = 1 / math.Sqrt(invVar)
		}
	}
	return out, true
}

// maxErrorRange is the range of the largest deviation of a fitted point from the
// ideal transfer: from 0 to the readable output's distance from the farthest
// ideal output of the sweep.
func (f *fitStep) maxErrorRange(seq *Sequence) (lo, hi float64, ok bool) {
	olo, ohi, ok := outputSpan(seq)
	if !ok || f.sweep == nil {
		return 0, 0, false
	}
	for _, x := range f.sweep.Plan.Levels() {
		if x < f.lo || x > f.hi {
			continue
		}
		y := seq.IdealGain*x + seq.IdealOffset
		hi = math.Max(hi, math.Max(math.Abs(ohi-y), math.Abs(y-olo)))
	}
	return 0, hi, true
}

// keysText is the keys of a step kind's results table, sorted, as messages list
// them: "[error mean noise]".
func keysText[V any](m map[string]V) string {
	out := make([]string, 0, len(m))
	for k := range m {
		out = append(out, k)
	}
	sort.Strings(out)
	return fmt.Sprint(out)
}
