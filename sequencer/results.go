package sequencer

import (
	"fmt"

	"trimline/instruments/units"
	"trimline/limits"
)

// Result names of the first sequence layout (records of schema 1): its fixed
// flow computed these and only these.
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

// firstLayoutStages are the stages of the first layout's results, for records
// of schema 1, which do not carry them.
var firstLayoutStages = map[string]Stage{
	ResPreOffset: AsFound, ResPreGainError: AsFound, ResPreNonlinearity: AsFound,
	ResOffsetCode: Adjustment, ResGainCode: Adjustment,
	ResPostOffset: AsLeft, ResPostGainError: AsLeft, ResPostNonlinearity: AsLeft, ResPostMaxError: AsLeft, ResPostNoise: AsLeft,
}

// firstLayoutQuantities say what each first-layout result measures, for records
// without Quantity (schema 1, and schema-2 records made before results carried
// it): the fit output or "code".
var firstLayoutQuantities = map[string]string{
	ResPreOffset: "offset", ResPreGainError: "gain_error", ResPreNonlinearity: "nonlinearity",
	ResOffsetCode: "code", ResGainCode: "code",
	ResPostOffset: "offset", ResPostGainError: "gain_error", ResPostNonlinearity: "nonlinearity",
	ResPostMaxError: "max_error", ResPostNoise: "noise",
}

// QuantityOf is what r measures: its own Quantity, or in a record without it the
// quantity of the first layout's result of that name ("" for any other).
func (r Result) QuantityOf() string {
	if r.Quantity != "" {
		return r.Quantity
	}
	return firstLayoutQuantities[r.Name]
}

// StageOf is the stage of r: its own, or in a record of schema 1 the stage of
// the first layout's result of that name (0 for any other).
func (r Result) StageOf() Stage {
	if r.Stage != 0 {
		return r.Stage
	}
	return firstLayoutStages[r.Name]
}

// ResultStage is the stage of the named result of the record, 0 when the record
// has no such result.
func (rec *Record) ResultStage(name string) Stage {
	for _, r := range rec.Results {
		if r.Name == name {
			return r.StageOf()
		}
	}
	return firstLayoutStages[name]
}

// Stage is when in a run a result is measured.
type Stage int

const (
	AsFound    Stage = iota + 1 // before adjustment: the unit as it came, from the pre-trim sweep
	Adjustment                  // the adjustment itself: the trim codes
	AsLeft                      // after adjustment: the unit as it ships, from the verify sweep
)

// MarshalText writes the stage as the record spells it: as_found, adjustment,
// as_left.
func (s Stage) MarshalText() ([]byte, error) {
	switch s {
	case AsFound:
		return []byte("as_found"), nil
	case Adjustment:
		return []byte("adjustment"), nil
	case AsLeft:
		return []byte("as_left"), nil
	}
	return nil, fmt.Errorf("sequencer: no stage %d", int(s))
}

// UnmarshalText reads a stage as MarshalText writes it.
func (s *Stage) UnmarshalText(b []byte) error {
	switch string(b) {
	case "as_found":
		*s = AsFound
	case "adjustment":
		*s = Adjustment
	case "as_left":
		*s = AsLeft
	default:
		return fmt.Errorf("sequencer: unknown stage %q", b)
	}
	return nil
}

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

// ResultDef declares one result a step computes.
type ResultDef struct {
	Name string // what limit files write in uses:
	// Channel is the channel of a result a per-channel step declares once and
	// computes on every channel ("" for a result of the whole unit).
	Channel string
	Step    string    // the step that declares it
	Dim     units.Dim // units.Volt, units.Ratio, units.Count or units.Number; the value is in SI (a Number unscaled)
	Stage   Stage
	// Quantity is what the result measures, the same word for the same thing at
	// every stage: a fit output (offset, gain_error, nonlinearity, max_error,
	// noise, lack_of_fit), "code" for a trim code, "" when a kind does not say.
	// An as-found and an as-left result of one Quantity are a before and after.
	Quantity string
	About    string // what it is, with its unit, in a few words
	// Range is where the value can physically be, {low, high} in SI units, for
	// lint's never-passes and never-fails checks. It may depend on the product:
	// seq is the sequence in force, or nil when none is known, and ok is false when
	// the range cannot be known without it. A nil Range means no range.
	Range func(seq *Sequence) (lo, hi float64, ok bool)
}

// Key is the result's key among a run's values: its name, name@channel for a
// per-channel result (limits.ChannelKey).
func (d ResultDef) Key() string { return limits.ChannelKey(d.Name, d.Channel) }

// Unit is the name of the result's dimension as the record writes it: "V",
// "A", "ratio", "code" (a trim code, or any other count a kind declares),
// "count" (a number the unit reports about itself: a measured quantity such as
// an offset of a unit whose response is in counts) or "number" (a plain
// statistic, shown unscaled).
func (d ResultDef) Unit() string {
	switch d.Dim {
	case units.Volt:
		return "V"
	case units.Ampere:
		return "A"
	case units.Count:
		if measuredQuantities[d.Quantity] {
			return "count"
		}
		return "code"
	case units.Number:
		return "number"
	}
	return "ratio"
}

// measuredQuantities are the quantities that are in the response's dimension:
// a Count result of one of them is a count the unit reported, not a trim code.
var measuredQuantities = map[string]bool{"offset": true, "terminal_offset": true, "max_error": true, "noise": true, "error": true, "mean": true,
	"offset_coefficient": true} // an offset coefficient in counts is a number of counts the unit adds

// PhysicalRanges returns the physical range of every result whose range is known,
// for limits.LintOptions. seq supplies the product's facts (trim DAC sizes, the
// meter range, the ideal transfer); with seq nil only the ranges that do not
// depend on the product are returned.
func PhysicalRanges(seq *Sequence) map[string][2]float64 {
	out := map[string][2]float64{}
	if seq == nil {
		return out
	}
	for _, d := range seq.Results() {
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

// codeRange is the code range of the DAC.
func codeRange(d DAC) func(*Sequence) (float64, float64, bool) {
	return func(*Sequence) (float64, float64, bool) { return float64(d.MinCode()), float64(d.MaxCode()), true }
}

// outputSpan is the output the station can read at all: within ± the meter range
// the sequence sets (beyond it the meter overloads and the run is a fault, with no
// results). Unknown with no sequence or an auto-ranging meter.
func outputSpan(seq *Sequence) (lo, hi float64, ok bool) {
	if seq == nil || !(seq.Meter.Range > 0) || seq.ResponseDim != seq.Meter.dim() {
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

// noiseRange is 0 to the readable output's half-span: the standard deviation of
// readings confined to an interval cannot exceed its half-width.
func noiseRange(seq *Sequence) (lo, hi float64, ok bool) {
	olo, ohi, ok := outputSpan(seq)
	if !ok {
		return 0, 0, false
	}
	return 0, (ohi - olo) / 2, true
}

// results collects the named results of one run, keyed by ResultDef.Key.
type results struct {
	defs   []ResultDef
	values map[string]limits.Value
	unc    map[string]Uncertainty
	set_   map[string]bool // computed (valid or not) by a step
	budget map[string][]BudgetRow
}

func newResults(seq *Sequence) *results {
	r := &results{defs: seq.Results(), values: map[string]limits.Value{}, unc: map[string]Uncertainty{}, set_: map[string]bool{}}
	for _, d := range r.defs {
		r.values[d.Key()] = limits.Value{Why: "not measured"}
	}
	return r
}

// unset marks every result no step computed invalid with why.
func (r *results) unset(why string) {
	for _, d := range r.defs {
		if !r.set_[d.Key()] {
			r.values[d.Key()] = limits.Value{Why: why}
		}
	}
}

func (r *results) set(name string, v float64) {
	r.set_[name] = true
	r.values[name] = limits.Value{V: v, Valid: finite(v), Why: "not a finite number"}
}

// setU sets a result with its uncertainty.
func (r *results) setU(name string, v float64, u Uncertainty) {
	r.set_[name] = true
	val := limits.Value{V: v, Valid: finite(v), Why: "not a finite number",
		Std: u.Std, U: u.Expanded, K: u.K, DOF: u.DOF}
	if u.MC != nil { // the statement names the interval, not the GUM's νeff
		val.Interval = u.MC.Interval
	}
	r.values[name] = val
	r.unc[name] = u
	delete(r.budget, name) // a step's SetBudget follows its SetU
}

// flagged records a value that is known but must not pass: a saturated code.
func (r *results) flagged(name string, v float64, why string) {
	r.set_[name] = true
	r.values[name] = limits.Value{V: v, Why: why}
	delete(r.unc, name)
	delete(r.budget, name)
}

func (r *results) invalid(name, why string) {
	r.set_[name] = true
	r.values[name] = limits.Value{Why: why}
	delete(r.unc, name)
	delete(r.budget, name)
}

func (r *results) list() []Result {
	out := make([]Result, 0, len(r.defs))
	for _, d := range r.defs {
		v := r.values[d.Key()]
		res := Result{Name: d.Name, Channel: d.Channel, Stage: d.Stage, Step: d.Step, Quantity: d.Quantity, Value: v.V, Unit: d.Unit(), Valid: v.Valid, Unc: r.unc[d.Key()], Budget: r.budget[d.Key()]}
		if !v.Valid {
			res.Value, res.Note = 0, v.Why
		}
		out = append(out, res)
	}
	return out
}
