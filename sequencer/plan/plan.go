// Package plan is the trim planner: from a product's error budget (package
// budget) to the distribution of the pre-trim offset and gain error, the trim
// codes the units will need, the fraction that would saturate each DAC, what is
// left after trim, the yield against the limit file, and the smallest DAC width
// and range that meet a target yield, before the first unit is built.
//
// Units are drawn by Monte Carlo with the adaptive stopping rule of JCGM
// 101:2008 §7.9 on the two pre-trim quantities; every trial is also trimmed with
// the station's arithmetic (see trim.go), so codes, residuals and yield come from
// the same units. The law of propagation (JCGM 100) and the worst case of the
// pre-trim quantities are reported beside.
package plan

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"sort"

	"trimline/instruments/budget"
	"trimline/instruments/units"
	"trimline/sequencer"
	"trimline/sequencer/uncertainty"
)

// Names of the post-trim parts of the residual (Quantity.Shares of the
// post-trim quantities).
const (
	PartQuantisation = "quantisation"         // rounding to a code (½ LSB)
	PartSaturation   = "saturation"           // what a DAC at the end of its range could not take
	PartDNL          = "DNL"                  // the DACs' own step errors
	PartCoefficient  = "coefficient rounding" // firmware coefficients held in their number format
	PartUntrimmed    = "not trimmed"          // no DAC adjusts the quantity: it leaves as it came
)

// Options are how Run plans.
type Options struct {
	Seed uint64 // of the random stream; the same seed gives the same report
	// TargetYield is the yield the recommendation must meet, a fraction
	// (0.995); 0 makes no recommendation.
	TargetYield float64
	// Tolerances are the limit file's bounds on the predicted results; nil
	// predicts no yield and makes no recommendation.
	Tolerances *Tolerances
	// Digits is the number of significant digits of the standard uncertainty
	// the adaptive stopping rule holds steady (JCGM 101 §7.9, ndig); default 2.
	Digits int
	// MinTrials is the fewest units drawn: after the adaptive rule stops, units
	// are drawn on to MinTrials so the yield's standard error is small enough to
	// size DACs by (default 100 000). MaxTrials bounds both (default 1 000 000).
	MinTrials, MaxTrials int
	// SearchTrials is how many of the units the recommendation's search judges
	// each candidate design on (default 100 000).
	SearchTrials int
}

// Quantity is one predicted quantity over the trials.
type Quantity struct {
	Name string // pre_offset, pre_gain_error, DAC_code, post_offset, post_gain_error
	Unit string // "V" or "A" (the output's unit), "ratio" (a fraction), "code"
	// Mean and SD of the trials, and the probabilistically symmetric 95 %
	// coverage interval (JCGM 101 §7.7).
	Mean, SD   float64
	Interval95 [2]float64
	// GUM95 is the 95 % interval of the law of propagation (JCGM 100, k = 1.96
	// on a normal distribution), nil when there is none; GUMBasis says what it
	// rests on.
	GUM95    *[2]float64
	GUMBasis string
	// WorstCase is [low, high] with every bounded source at an end and every
	// normal one at ±3σ (nil when none is given); WorstBasis says so.
	WorstCase  *[2]float64
	WorstBasis string
	// Shares are each contribution's fraction of the variance: the budget's
	// sources for a pre-trim quantity and a code (JCGM 100), the parts of the
	// residual for a post-trim one (from the trials).
	Shares map[string]float64
	// Values are the trials' values, sorted.
	Values []float64
}

// DACPlan is what the trials ask of one DAC of the design.
type DACPlan struct {
	DAC    budget.DAC
	Result string // its code's quantity name (NAME_code)
	// Saturation is the fraction of units whose ideal code lies outside
	// MinCode … MaxCode, SaturationSE its standard error.
	Saturation, SaturationSE float64
}

// CoefficientPlan is one firmware coefficient of the design and the fraction
// of units whose exact value lies beyond its format's range (held at the end
// of the range: saturated), with its standard error.
type CoefficientPlan struct {
	Coefficient              budget.Coefficient
	Saturation, SaturationSE float64
}

// Recommendation is the smallest design of one DAC that meets the target.
type Recommendation struct {
	DAC    string // the designed DAC it replaces
	Result string // the post-trim result it is judged on (post_offset, post_gain_error)
	Found  bool
	Reason string // why there is none, when Found is false
	// The design: Bits, LSB (as the DAC's lsb: output or input unit by
	// placement, a fraction for gain), Range = 2^Bits·LSB, no-correction code
	// at mid-scale.
	Bits         int
	LSB, Range   float64
	NoCorrection int
	// Pass is the fraction of units whose Result passes with it, PassSE its
	// standard error; Saturation the fraction that saturate it.
	Pass, PassSE, Saturation float64
	Trials                   int // units the search judged it on
}

// Report is the plan of one budget.
type Report struct {
	Budget *budget.Budget
	Seed   uint64
	// Trials is the number of units drawn; AdaptiveTrials the number at which
	// the adaptive rule (JCGM 101 §7.9) held the pre-trim quantities steady.
	Trials, AdaptiveTrials int
	Digits                 int
	Pre                    []Quantity // pre_offset, pre_gain_error
	Codes                  []Quantity // a code per DAC, in the design's order
	Post                   []Quantity // post_offset, post_gain_error
	DACs                   []DACPlan
	Coefficients           []CoefficientPlan // the firmware's coefficients when it trims by them
	Tolerances             *Tolerances       // nil when there is no limit file
	// Yield is the fraction of units whose predicted results all pass,
	// YieldSE its standard error √(p(1 − p)/M); OffsetPass and GainPass each
	// result's own fraction. NaN without tolerances.
	Yield, YieldSE       float64
	OffsetPass, GainPass float64
	TargetYield          float64
	Recommendations      []Recommendation
	// AllRecommended is the yield of the design with every DAC as
	// recommended (NaN when some DAC has none).
	AllRecommended, AllRecommendedSE float64
	// Judged are the predicted results the yield judges: Predicted, less
	// post_offset when the limit file judges it in another unit than the
	// budget's output (a count), which the plan cannot convert.
	Judged []string
	// PerDACTarget is the fraction each DAC was sized to pass its own result
	// in: 1 − (1 − TargetYield)/k for k DACs, so that their failures together
	// stay within the target (union bound), tightened while the DACs together
	// still fell short of it.
	PerDACTarget float64
	// Notes are what a reader must know about the numbers, one sentence each.
	Notes []string
}

// planner holds what the trials record.
type planner struct {
	b      *budget.Budget
	d      *design
	tol    *Tolerances
	nDAC   int
	search int // trials whose DAC errors are kept for the search

	pre       [2][]float64 // every trial's pre-trim offset and gain error (sorted by report)
	raw       [2][]float64 // the first search trials' ones, in the order drawn
	codes     [][]float64
	post      [2][]float64
	z         [][][]float32 // [trial][DAC] the bit errors' normal scores, first search trials
	parts     [2][3]moments // per post quantity: quantisation, saturation, DNL
	saturated []int         // per DAC
	coefSat   []int         // per coefficient, when the design trims by coefficients
	pass      [3]int        // all, offset, gain
	resOffset float64       // the pre-trim offset's rounding, output unit
	resGain   float64       // the pre-trim gain error's rounding

	out, clamped, exact after
}

// Run plans budget b: it draws units until the adaptive rule holds the
// pre-trim quantities steady and at least o.MinTrials have been drawn, trims
// each, and (with tolerances) judges them and searches for the smallest DACs
// that meet o.TargetYield. ctx is checked between trials of the search; a
// cancel returns ctx's error.
func Run(ctx context.Context, b *budget.Budget, o Options) (*Report, error) {
	if o.Digits == 0 {
		o.Digits = 2
	}
	if o.MaxTrials == 0 {
		o.MaxTrials = 1_000_000
	}
	if o.MinTrials == 0 {
		o.MinTrials = 100_000
	}
	o.MinTrials = min(o.MinTrials, o.MaxTrials)
	if o.SearchTrials == 0 {
		o.SearchTrials = 100_000
	}
	var notes []string
	judged := slices.Clone(Predicted)
	if t := o.Tolerances; t != nil && t.OffsetDim != 0 && t.Offset.Bounded() {
		if want := dimOf(b.Transfer.OutputUnit); t.OffsetDim != want {
			c := *t
			c.Offset = unbounded()
			c.Offset.Limits = t.Offset.Limits
			o.Tolerances = &c
			judged = slices.DeleteFunc(judged, func(r string) bool { return r == sequencer.ResPostOffset })
			notes = append(notes, fmt.Sprintf("%s judges %s as a %s but the budget's output is a %s: the offset is not judged, and the yield is that of the other results only",
				t.File, sequencer.ResPostOffset, t.OffsetDim, want))
		}
	}
	for _, x := range b.Trim.DACs {
		if lo, hi := x.MinCode(), x.MaxCode(); x.NoCorrection == lo || x.NoCorrection == hi {
			notes = append(notes, fmt.Sprintf("DAC %s: its no-correction code %d is an end of its codes %d … %d, so it corrects one way only",
				x.Name, x.NoCorrection, lo, hi))
		}
	}
	if len(b.Trim.DACs) == 0 && len(b.Trim.Coefficients) == 0 {
		notes = append(notes, "the budget has no trim design: the units leave as they came, and there is nothing to recommend")
	}
	if len(b.Trim.DACs) > 0 && len(b.Trim.Coefficients) > 0 {
		notes = append(notes, "the budget gives DACs and coefficients: the DACs are planned, the coefficients left out")
	}
	p := &planner{b: b, d: newDesign(b.Trim, b.Transfer.Gain, b.Transfer.OutputAtZero), tol: o.Tolerances,
		nDAC: len(b.Trim.DACs), search: o.SearchTrials}
	// Pre-trim values rounded far below anything a station resolves (as
	// Simulate does), so a quantity no source moves is exactly constant and
	// settles the stopping rule.
	p.resOffset, p.resGain = preTrimResolution(b)
	p.codes = make([][]float64, p.nDAC)
	p.saturated = make([]int, p.nDAC)
	p.coefSat = make([]int, len(p.d.coef))
	for _, a := range []*after{&p.out, &p.clamped, &p.exact} {
		a.Steps = make([]step, max(p.nDAC, len(p.d.coef)))
	}
	res, err := uncertainty.MonteCarloModel(2, func(r *rand.Rand, y []float64) {
		y[0], y[1] = p.trial(r)
	}, uncertainty.MCOptions{P: 0.95, Digits: o.Digits, MaxTrials: o.MaxTrials, Seed: o.Seed})
	if err != nil {
		return nil, fmt.Errorf("Monte Carlo: %w", err)
	}
	rep := &Report{Judged: judged, Budget: b, Seed: o.Seed, AdaptiveTrials: res.Trials, Digits: o.Digits, Tolerances: o.Tolerances,
		TargetYield: o.TargetYield, Notes: notes}
	if !res.Converged {
		rep.Notes = append(rep.Notes, fmt.Sprintf("the adaptive rule was not met within %d units: the pre-trim numbers are those of the units drawn", res.Trials))
	}
	// More units, on a stream of their own, when the rule stopped early.
	if more := o.MinTrials - len(p.pre[0]); more > 0 {
		r := rand.New(rand.NewPCG(o.Seed, 0x3c6ef372fe94f82b))
		for range more {
			p.trial(r)
		}
	}
	rep.Trials = len(p.pre[0])
	for q := range p.raw {
		p.raw[q] = slices.Clone(p.pre[q][:len(p.z)])
	}
	p.report(rep)
	if o.Tolerances != nil && o.TargetYield > 0 {
		if err := p.recommend(ctx, rep, o.TargetYield); err != nil {
			return nil, err
		}
	}
	return rep, nil
}

// trial draws one unit, trims it and records what it gives; it returns the
// unit's pre-trim offset and gain error.
func (p *planner) trial(r *rand.Rand) (off, ge float64) {
	u := p.b.Draw(r)
	off, ge = u.PreTrim(p.b)
	off, ge = roundTo(off, p.resOffset), roundTo(ge, p.resGain)
	// Each DAC's bit errors, as normal scores for every bit a DAC may have, so
	// the search can try wider DACs on the same units.
	z := make([][]float32, p.nDAC)
	for i, x := range p.d.dacs {
		if x.DNL == 0 {
			continue
		}
		z[i] = make([]float32, sequencer.MaxDACBits)
		for k := range z[i] {
			z[i][k] = float32(r.NormFloat64())
		}
	}
	if len(p.z) < p.search {
		p.z = append(p.z, z)
	}
	p.pre[0], p.pre[1] = append(p.pre[0], off), append(p.pre[1], ge)
	p.d.solve(off, ge, z, how{clamp: true, dnl: true}, &p.out)
	p.d.solve(off, ge, z, how{clamp: true}, &p.clamped)
	p.d.solve(off, ge, z, how{}, &p.exact)
	for i, s := range p.out.Steps {
		switch {
		case p.d.coef != nil && s.Saturated:
			p.coefSat[i]++
		case p.d.coef == nil:
			p.codes[i] = append(p.codes[i], float64(s.Code))
			if s.Saturated {
				p.saturated[i]++
			}
		}
	}
	post := [2]float64{p.out.Offset, p.out.GainError}
	clamped := [2]float64{p.clamped.Offset, p.clamped.GainError}
	exact := [2]float64{p.exact.Offset, p.exact.GainError}
	for q := range 2 {
		p.post[q] = append(p.post[q], post[q])
		p.parts[q][0].add(exact[q])
		p.parts[q][1].add(clamped[q] - exact[q])
		p.parts[q][2].add(post[q] - clamped[q])
	}
	if p.tol != nil {
		okO, okG := p.tol.Offset.Pass(post[0]), p.tol.Gain.Pass(post[1])
		if okO && okG {
			p.pass[0]++
		}
		if okO {
			p.pass[1]++
		}
		if okG {
			p.pass[2]++
		}
	}
	return off, ge
}

// report fills rep from what the trials recorded.
func (p *planner) report(rep *Report) {
	b, m := p.b, len(p.pre[0])
	outUnit := b.Transfer.OutputUnit
	if outUnit == "" {
		outUnit = "V"
	}
	props := map[string]budget.Propagation{}
	for _, g := range b.Propagate() {
		props[g.Name] = g
	}
	worstBasis := "every bounded source at an end of its range, every normal source at ±3σ"
	for q, name := range []string{budget.PreOffset, budget.PreGainError} {
		unit := outUnit
		if q == 1 {
			unit = "ratio"
		}
		v := summarise(name, unit, p.pre[q])
		if g, ok := props[name]; ok {
			v.GUM95, v.GUMBasis = ptr(g.Interval95), "law of propagation (JCGM 100), normal, k = 1.96"
			v.WorstCase, v.WorstBasis = ptr(g.WorstCase), worstBasis
			v.Shares = g.Shares
		}
		rep.Pre = append(rep.Pre, v)
	}
	// Codes: the first DAC of each quantity takes the bulk, so to first order
	// its code is N − (pre-trim value)/(step); later ones take what is left.
	for i, x := range p.d.dacs {
		v := summarise(x.Name+"_code", "code", p.codes[i])
		if isFirst(p.d, i) {
			src, scale := rep.Pre[0], x.LSB
			if x.Adjusts == sequencer.AdjustGain {
				src = rep.Pre[1]
			} else if x.Placement == placementBefore {
				scale = math.Abs(b.Transfer.Gain) * x.LSB
			}
			code := func(w float64) float64 { return float64(x.NoCorrection) - w/scale }
			if src.GUM95 != nil {
				v.GUM95 = sortedPair(code(src.GUM95[0]), code(src.GUM95[1]))
				v.GUMBasis = "first order from the " + src.Name + " interval: N − value/LSB, not rounded nor clamped"
			}
			if src.WorstCase != nil {
				v.WorstCase = sortedPair(code(src.WorstCase[0]), code(src.WorstCase[1]))
				v.WorstBasis = "first order from the " + src.Name + " worst case, not clamped: the codes a unit could ask for"
			}
			v.Shares = src.Shares
		}
		rep.Codes = append(rep.Codes, v)
		rep.DACs = append(rep.DACs, DACPlan{DAC: x, Result: v.Name,
			Saturation: float64(p.saturated[i]) / float64(m), SaturationSE: YieldSE(float64(p.saturated[i])/float64(m), m)})
	}
	for i, c := range p.d.coef {
		f := float64(p.coefSat[i]) / float64(m)
		rep.Coefficients = append(rep.Coefficients, CoefficientPlan{Coefficient: c, Saturation: f, SaturationSE: YieldSE(f, m)})
	}
	for q, name := range []string{sequencer.ResPostOffset, sequencer.ResPostGainError} {
		unit := outUnit
		if q == 1 {
			unit = "ratio"
		}
		v := summarise(name, unit, p.post[q])
		if u, basis, ok := p.commonPractice(q, [2]float64{rep.Pre[0].SD, rep.Pre[1].SD}); ok {
			v.GUM95 = &[2]float64{-1.96 * u, 1.96 * u}
			v.GUMBasis = basis
			h := u * math.Sqrt(3)
			if p.d.coef == nil {
				v.WorstCase, v.WorstBasis = &[2]float64{-h, h}, "common practice: ±½ LSB of quantisation only"
			}
		}
		v.Shares = p.shares(q)
		rep.Post = append(rep.Post, v)
	}
	rep.Yield, rep.YieldSE, rep.OffsetPass, rep.GainPass = math.NaN(), math.NaN(), math.NaN(), math.NaN()
	rep.AllRecommended, rep.AllRecommendedSE = math.NaN(), math.NaN()
	if p.tol != nil {
		rep.Yield = float64(p.pass[0]) / float64(m)
		rep.YieldSE = YieldSE(rep.Yield, m)
		rep.OffsetPass, rep.GainPass = float64(p.pass[1])/float64(m), float64(p.pass[2])/float64(m)
	}
}

// isFirst reports whether DAC i is solved first among those adjusting the same
// quantity.
func isFirst(d *design, i int) bool {
	order := d.offsets
	if d.dacs[i].Adjusts == sequencer.AdjustGain {
		order = d.gains
	}
	return len(order) > 0 && order[0] == i
}

// commonPractice is the standard uncertainty the rule of thumb gives post-trim
// quantity q (0 offset, 1 gain error): the last DAC solved for it leaves a
// rounding error uniform over ±½ LSB, u = LSB/√12 (output-referred: times |G|
// before the gain stage); with coefficients the same of their rounding steps
// (preSD: the pre-trim offset's and gain error's standard deviations, for the
// size of a float32 offset coefficient).
func (p *planner) commonPractice(q int, preSD [2]float64) (u float64, basis string, ok bool) {
	b := p.b
	if p.d.coef != nil {
		// k ≈ 1 multiplies the output at zero input, Y0; m is about the
		// pre-trim offset and Y0 times the gain error. Each is rounded in its
		// own format and unit.
		y0 := math.Abs(b.Transfer.OutputAtZero)
		var sk, sm float64
		gain, offset := false, false
		for _, c := range p.d.coef {
			if c.Adjusts == sequencer.AdjustGain {
				sk, gain = c.Step(1), true
			} else {
				sm, offset = c.Step(preSD[0]+y0*preSD[1]), true
			}
		}
		if q == 1 {
			return sk / math.Sqrt(12), "common practice: coefficient rounding uniform over ±½ step, u = step/√12, k = 1.96", gain
		}
		return math.Hypot(sk*y0, sm) / math.Sqrt(12), "common practice: rounding of both coefficients uniform over ±½ step (each in its format and unit), u = step/√12, k = 1.96", offset
	}
	order := p.d.offsets
	if q == 1 {
		order = p.d.gains
	}
	if len(order) == 0 {
		return 0, "", false
	}
	x := p.d.dacs[order[len(order)-1]]
	lsb := x.LSB
	if x.Placement == placementBefore {
		lsb *= math.Abs(b.Transfer.Gain)
	}
	return lsb / math.Sqrt(12), "common practice: ½ LSB quantisation, u = LSB/√12, k = 1.96 (DNL and saturation left out)", true
}

// shares are the parts of post-trim quantity q's residual, each as a fraction
// of the sum of their variances (the parts are nearly independent, so the sum is
// close to the total).
func (p *planner) shares(q int) map[string]float64 {
	names := [3]string{PartQuantisation, PartSaturation, PartDNL}
	switch {
	case p.d.coef != nil && p.d.hasCoef(q):
		names[0] = PartCoefficient
	case p.d.coef != nil:
		names[0] = PartUntrimmed
	case q == 0 && len(p.d.offsets) == 0, q == 1 && len(p.d.gains) == 0:
		names[0] = PartUntrimmed
	}
	var sum float64
	for _, m := range p.parts[q] {
		sum += m.variance()
	}
	out := map[string]float64{}
	if sum == 0 {
		return out
	}
	for k, m := range p.parts[q] {
		if m.variance() > 0 || k == 0 {
			out[names[k]] = m.variance() / sum
		}
	}
	return out
}

// summarise is the quantity name of the trials' values vs (sorted in place).
func summarise(name, unit string, vs []float64) Quantity {
	sort.Float64s(vs)
	var m moments
	for _, v := range vs {
		m.add(v)
	}
	return Quantity{Name: name, Unit: unit, Mean: m.mean, SD: math.Sqrt(m.variance()), Interval95: coverage(vs, 0.95), Values: vs}
}

// coverage is the probabilistically symmetric coverage interval for
// probability p of the sorted values (JCGM 101:2008 §7.7: q = pM rounded to an
// integer, r = (M − q)/2, the interval [y_(r), y_(r+q)]).
func coverage(sorted []float64, p float64) [2]float64 {
	m := len(sorted)
	if m == 0 {
		return [2]float64{math.NaN(), math.NaN()}
	}
	q := int(p*float64(m) + 0.5)
	r := max((m-q)/2, 1)
	hi := min(r+q, m)
	return [2]float64{sorted[r-1], sorted[hi-1]}
}

// moments accumulates a mean and variance (Welford's method).
type moments struct {
	n        int
	mean, m2 float64
}

func (m *moments) add(v float64) {
	m.n++
	d := v - m.mean
	m.mean += d / float64(m.n)
	m.m2 += d * (v - m.mean)
}

// variance is the sample variance (n − 1), 0 for fewer than two values.
func (m moments) variance() float64 {
	if m.n < 2 {
		return 0
	}
	return m.m2 / float64(m.n-1)
}

func ptr(v [2]float64) *[2]float64 { return &v }

func sortedPair(a, b float64) *[2]float64 {
	if a > b {
		a, b = b, a
	}
	return &[2]float64{a, b}
}

// LSBUnit is the unit of DAC x's LSB in b: "ratio" for a gain DAC, the input's
// unit before the gain stage, the output's after it ("V" when not given).
func LSBUnit(b *budget.Budget, x budget.DAC) string {
	u := b.Transfer.OutputUnit
	switch {
	case x.Adjusts == sequencer.AdjustGain:
		return "ratio"
	case x.Placement == placementBefore:
		u = b.Transfer.InputUnit
	}
	if u == "" {
		u = "V"
	}
	return u
}

// roundTo rounds v to a multiple of res (v itself for res ≤ 0).
func roundTo(v, res float64) float64 {
	if !(res > 0) {
		return v
	}
	return math.Round(v/res) * res
}

// dimOf is the dimension of an output unit: amperes for "A", volts otherwise.
func dimOf(unit string) units.Dim {
	if unit == "A" {
		return units.Ampere
	}
	return units.Volt
}
