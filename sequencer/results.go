package sequencer

import (
	"fmt"
	"math"
	"slices"

	"trimline/instruments/units"
	"trimline/limits"
)

// Result names the engine computes for every unit. Limit files may judge these and
// only these. Each is declared once, with everything else about it, in the results
// table below.
const (
	ResPreOffset        = "pre_offset"
	ResPreGainError     = "pre_gain_error"
	ResPreNonlinearity  = "pre_nonlinearity"
	ResOffsetCode       = "offset_code"
	ResGainCode         = "gain_code"
	ResPostOffset       = "post_offset"
	ResPostGainError    = "post_gain_error"
	ResPostNonlinearity = "post_nonlinearity"
	ResPostMaxError     = "post_max_error"
	ResPostNoise        = "post_noise"
)

// The results table: one row per result, in the order results appear in the record.
// Values are SI: volts, plain fractions (a limit written in ppm or % sees them
// scaled), counts. Everything else about results is derived from these rows: the
// catalogue limits.Load checks names against (ResultCatalog), the record's order,
// lint's physical ranges (PhysicalRanges), the certificate's as-found/as-left
// grouping and the as-found reasons first (ResultStage).
func init() {
	for _, d := range []ResultDef{
		{Name: ResPreOffset, Dim: units.Volt, Stage: AsFound, About: "output error at zero input before trim, V", Range: outputError},
		{Name: ResPreGainError, Dim: units.Ratio, Stage: AsFound, About: "slope/ideal − 1 before trim, fraction", Range: fixedRange(-1, 1)},
		{Name: ResPreNonlinearity, Dim: units.Ratio, Stage: AsFound, About: "max |residual| / full scale before trim, fraction", Range: fixedRange(0, 1)},
		{Name: ResOffsetCode, Dim: units.Count, Stage: Adjustment, About: "offset trim code written", Range: codeRange(func(t TrimPlan) DAC { return t.Offset })},
		{Name: ResGainCode, Dim: units.Count, Stage: Adjustment, About: "gain trim code written", Range: codeRange(func(t TrimPlan) DAC { return t.Gain })},
		{Name: ResPostOffset, Dim: units.Volt, Stage: AsLeft, About: "output error at zero input after trim, V", Range: outputError},
		{Name: ResPostGainError, Dim: units.Ratio, Stage: AsLeft, About: "slope/ideal − 1 after trim, fraction", Range: fixedRange(-1, 1)},
		{Name: ResPostNonlinearity, Dim: units.Ratio, Stage: AsLeft, About: "max |residual| / full scale after trim, fraction", Range: fixedRange(0, 1)},
		{Name: ResPostMaxError, Dim: units.Volt, Stage: AsLeft, About: "max |mean − ideal| over the verification points, V", Range: maxError},
		{Name: ResPostNoise, Dim: units.Volt, Stage: AsLeft, About: "pooled standard deviation of the verification readings, V rms", Range: noiseRange},
	} {
		RegisterResult(d)
	}
}

// Stage is when in a run a result is measured.
type Stage int

const (
	AsFound    Stage = iota + 1 // before adjustment: the unit as it came, from the pre-trim sweep
	Adjustment                  // the adjustment itself: the trim codes
	AsLeft                      // after adjustment: the unit as it ships, from the verify sweep
)

func (s Stage) String() string {
	switch s {
	case AsFound:
		return "as found"
	case Adjustment:
		return "adjustment"
	case AsLeft:
		return "as left"
	}
	return fmt.Sprintf("Stage(%d)", int(s))
}

// ResultDef declares one result: one row of the results table.
type ResultDef struct {
	Name  string    // what limit files write in uses:
	Dim   units.Dim // units.Volt, units.Ratio or units.Count; the value is in SI
	Stage Stage
	About string // what it is, with its unit, in a few words
	// Range is where the value can physically be, {low, high} in SI units, for
	// lint's never-passes and never-fails checks. It may depend on the product:
	// seq is the sequence in force, or nil when none is known, and ok is false when
	// the range cannot be known without it. A nil Range means no range.
	Range func(seq *Sequence) (lo, hi float64, ok bool)
}

// Unit is the name of the result's dimension as the record writes it: "V",
// "ratio" or "code".
func (d ResultDef) Unit() string {
	switch d.Dim {
	case units.Volt:
		return "V"
	case units.Count:
		return "code"
	}
	return "ratio"
}

var (
	resultDefs  []ResultDef // in registration order, which is the record's order
	resultIndex = map[string]int{}
)

// ResultCatalog is every result name with its dimension, for limits.Load. It is
// filled by RegisterResult; read it only after package initialisation.
var ResultCatalog = limits.Catalog{}

// RegisterResult adds a result to the table. Results appear in the record in the
// order they are registered. It panics on an empty name, a duplicate name or a
// missing stage, so a mistake stops the program at start-up. Call it from init.
func RegisterResult(d ResultDef) {
	switch _, dup := resultIndex[d.Name]; {
	case d.Name == "":
		panic("sequencer: RegisterResult with an empty name")
	case dup:
		panic("sequencer: RegisterResult called twice for " + d.Name)
	case d.Stage < AsFound || d.Stage > AsLeft:
		panic("sequencer: RegisterResult " + d.Name + " without a stage")
	}
	resultIndex[d.Name] = len(resultDefs)
	resultDefs = append(resultDefs, d)
	ResultCatalog[d.Name] = d.Dim
}

// Results returns the results table in the record's order.
func Results() []ResultDef { return append([]ResultDef(nil), resultDefs...) }

// LookupResult returns the row of the named result.
func LookupResult(name string) (ResultDef, bool) {
	i, ok := resultIndex[name]
	if !ok {
		return ResultDef{}, false
	}
	return resultDefs[i], true
}

// ResultStage is the stage of the named result, or 0 for a name not in the table.
func ResultStage(name string) Stage {
	d, _ := LookupResult(name)
	return d.Stage
}

// PhysicalRanges returns the physical range of every result whose range is known,
// for limits.LintOptions. seq supplies the product's facts (trim DAC sizes, the
// meter range, the ideal transfer); with seq nil only the ranges that do not
// depend on the product are returned.
func PhysicalRanges(seq *Sequence) map[string][2]float64 {
	out := map[string][2]float64{}
	for _, d := range resultDefs {
		if d.Range == nil {
			continue
		}
		if lo, hi, ok := d.Range(seq); ok {
			out[d.Name] = [2]float64{lo, hi}
		}
	}
	return out
}

func fixedRange(lo, hi float64) func(*Sequence) (float64, float64, bool) {
	return func(*Sequence) (float64, float64, bool) { return lo, hi, true }
}

// codeRange is 0 … 2^bits − 1 of the DAC the sequence declares.
func codeRange(dac func(TrimPlan) DAC) func(*Sequence) (float64, float64, bool) {
	return func(seq *Sequence) (float64, float64, bool) {
		if seq == nil {
			return 0, 0, false
		}
		return 0, float64(dac(seq.Trim).MaxCode()), true
	}
}

// outputSpan is the output the station can read at all: within ± the meter range
// the sequence sets (beyond it the meter overloads and the run is a fault, with no
// results). Unknown with no sequence or an auto-ranging meter.
func outputSpan(seq *Sequence) (lo, hi float64, ok bool) {
	if seq == nil || !(seq.Meter.Range > 0) {
		return 0, 0, false
	}
	return -seq.Meter.Range, seq.Meter.Range, true
}

// outputError is the range of an offset error: the readable output less the ideal
// output at zero input.
func outputError(seq *Sequence) (lo, hi float64, ok bool) {
	lo, hi, ok = outputSpan(seq)
	if !ok {
		return 0, 0, false
	}
	return lo - seq.IdealOffset, hi - seq.IdealOffset, true
}

// maxError is the range of the largest deviation of a verification point from the
// ideal transfer: from 0 to the readable output's distance from the farthest ideal
// output of the verify sweep.
func maxError(seq *Sequence) (lo, hi float64, ok bool) {
	olo, ohi, ok := outputSpan(seq)
	if !ok {
		return 0, 0, false
	}
	for _, x := range seq.Verify.Levels() {
		y := seq.IdealGain*x + seq.IdealOffset
		hi = math.Max(hi, math.Max(math.Abs(ohi-y), math.Abs(y-olo)))
	}
	return 0, hi, true
}

// noiseRange is 0 to the readable output's half-span: the standard deviation of
// readings confined to an interval cannot exceed its half-width.
func noiseRange(seq *Sequence) (lo, hi float64, ok bool) {
	olo, ohi, ok := outputSpan(seq)
	if !ok {
		return 0, 0, false
	}
	return 0, (ohi - olo) / 2, true
}

// results collects the named results of one run.
type results struct {
	values map[string]limits.Value
	unc    map[string]Uncertainty
}

func newResults() *results {
	r := &results{values: map[string]limits.Value{}, unc: map[string]Uncertainty{}}
	for _, d := range resultDefs {
		r.values[d.Name] = limits.Value{Why: "not measured"}
	}
	return r
}

func (r *results) set(name string, v float64) {
	r.values[name] = limits.Value{V: v, Valid: finite(v), Why: "not a finite number"}
}

// setU sets a result with its uncertainty.
func (r *results) setU(name string, v float64, u Uncertainty) {
	r.values[name] = limits.Value{V: v, Valid: finite(v), Why: "not a finite number",
		Std: u.Std, U: u.Expanded, K: u.K, DOF: u.DOF}
	r.unc[name] = u
}

func (r *results) invalid(name, why string) {
	r.values[name] = limits.Value{Why: why}
	delete(r.unc, name)
}

// invalidStages marks every result of the given stages invalid; no stages means
// every result.
func (r *results) invalidStages(why string, stages ...Stage) {
	for _, d := range resultDefs {
		if len(stages) == 0 || slices.Contains(stages, d.Stage) {
			r.invalid(d.Name, why)
		}
	}
}

func (r *results) list() []Result {
	out := make([]Result, 0, len(resultDefs))
	for _, d := range resultDefs {
		v := r.values[d.Name]
		res := Result{Name: d.Name, Value: v.V, Unit: d.Unit(), Valid: v.Valid, Unc: r.unc[d.Name]}
		if !v.Valid {
			res.Value, res.Note = 0, v.Why
		}
		out = append(out, res)
	}
	return out
}
