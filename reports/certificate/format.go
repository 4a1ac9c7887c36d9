package certificate

import (
	"fmt"
	"math"
	"regexp"
	"sort"
	"strconv"
	"strings"
	"time"

	"trimline/instruments/units"
	"trimline/limits"
	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer"
)

// timeFormat is the one way the certificate writes a time.
const timeFormat = "2006-01-02 15:04:05 UTC"

func fmtTime(t time.Time) string {
	if t.IsZero() {
		return "—"
	}
	return t.UTC().Format(timeFormat)
}

// dispUnit turns a unit as written in a limit file into its printed form.
func dispUnit(u string) string {
	u = strings.TrimSpace(u)
	switch u {
	case "ohm", "Ohm", "ohms":
		return "Ω"
	case "degC":
		return "°C"
	case "codes", "LSB":
		return "code"
	case "count", "counts":
		return "counts"
	}
	for _, suffix := range []string{"ohm", "Ohm"} {
		if p, ok := strings.CutSuffix(u, suffix); ok && len(p) == 1 {
			u = p + "Ω"
		}
	}
	if len(u) >= 2 && u[0] == 'u' && strings.ContainsAny(u[1:2], "VAsΩ") {
		u = "µ" + u[1:]
	}
	return u
}

// isCount reports whether a unit counts codes, which print as integers. (A
// "count", a number the unit reports, is no code: a mean of counts has
// decimals and an uncertainty.)
func isCount(u string) bool {
	switch strings.TrimSpace(u) {
	case "code", "codes", "LSB":
		return true
	}
	return false
}

// fmtNum writes v with four significant digits in fixed notation, or in
// exponent notation when it is very large or very small.
func fmtNum(v float64) string {
	return pdfdoc.Minus(fmtNumRaw(v))
}

func fmtNumRaw(v float64) string {
	switch {
	case math.IsNaN(v):
		return "NaN"
	case math.IsInf(v, 1):
		return "+Inf"
	case math.IsInf(v, -1):
		return "-Inf"
	case v == 0:
		return "0"
	}
	a := math.Abs(v)
	if a >= 1e6 || a < 1e-3 {
		return strconv.FormatFloat(v, 'e', 3, 64)
	}
	dec := 3 - int(math.Floor(math.Log10(a)))
	dec = max(0, min(dec, 6))
	return strconv.FormatFloat(v, 'f', dec, 64)
}

// fmtValue writes a limit value (already in the limit's unit) with its unit.
func fmtValue(v float64, unit string) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "not valid"
	}
	if isCount(unit) {
		return pdfdoc.Minus(strconv.FormatFloat(math.Round(v), 'f', 0, 64))
	}
	u := dispUnit(unit)
	if u == "" {
		if math.Abs(v-1) < 0.1 { // a correction factor: its difference from 1 shows
			return pdfdoc.Minus(units.FormatSig(v, 6))
		}
		return fmtNum(v)
	}
	return fmtNum(v) + " " + u
}

// outcomeValues lists an outcome's values, one "name = value" line each when it
// uses more than one result. The order is the order of Uses, then any other keys
// sorted, so that map order never reaches the page.
func outcomeValues(o limits.Outcome) []string {
	keys := outcomeKeys(o)
	if len(keys) == 0 {
		return []string{"not measured"}
	}
	if len(keys) == 1 {
		return []string{fmtValue(o.Values[keys[0]], o.Unit)}
	}
	out := make([]string, len(keys))
	for i, k := range keys {
		out[i] = k + " = " + fmtValue(o.Values[k], o.Unit)
	}
	return out
}

// outcomeKeys are the keys of o.Values in the order outcomeValues lists them.
func outcomeKeys(o limits.Outcome) []string {
	keys := make([]string, 0, len(o.Values))
	seen := map[string]bool{}
	for _, k := range o.Uses {
		if _, ok := o.Values[k]; ok && !seen[k] {
			keys = append(keys, k)
			seen[k] = true
		}
	}
	var rest []string
	for k := range o.Values {
		if !seen[k] {
			rest = append(rest, k)
		}
	}
	sort.Strings(rest)
	return append(keys, rest...)
}

// fmtResult writes a result's value in its dimension: volts with an SI prefix,
// ratios in ppm (or % when large), codes as integers, plain numbers (a
// lack-of-fit statistic) bare with three significant digits: "1.30".
func fmtResult(r sequencer.Result) string {
	if !r.Valid || math.IsNaN(r.Value) || math.IsInf(r.Value, 0) {
		return "not valid"
	}
	r = shownResult(r)
	if r.Unit == "number" {
		if exact(r) {
			return pdfdoc.Minus(strconv.FormatFloat(math.Round(r.Value), 'f', 0, 64))
		}
		if factor(r) {
			return pdfdoc.Minus(units.FormatSig(r.Value, 6))
		}
	}
	switch r.Unit {
	case "V", "A":
		return pdfdoc.Minus(units.Format(r.Value, r.Unit, 4))
	case "count":
		return countText(units.FormatSig(r.Value, 4))
	case "ratio":
		if math.Abs(r.Value) >= 0.01 {
			return pdfdoc.Minus(strconv.FormatFloat(r.Value*100, 'f', 3, 64)) + " %"
		}
		return pdfdoc.Minus(units.Format(r.Value*1e6, "ppm", 4))
	case "code":
		return pdfdoc.Minus(strconv.FormatFloat(math.Round(r.Value), 'f', 0, 64))
	case "number":
		return pdfdoc.Minus(units.FormatNumber(r.Value, 3))
	}
	return strings.TrimSpace(fmtNum(r.Value) + " " + r.Unit)
}

// shownResult is r as the certificate writes it: a result recorded in codes
// that has an evaluated uncertainty or a fraction is no trim code but a
// measured number of counts (an offset coefficient of a unit that reports
// counts), and is written as counts, with its U.
func shownResult(r sequencer.Result) sequencer.Result {
	if r.Unit == "code" && (hasU(r.Unc.Expanded) || r.Value != math.Round(r.Value)) {
		r.Unit = "count"
	}
	return r
}

// exact reports whether a result is an exact whole number that has no
// uncertainty: a trim code, or a count of passes.
func exact(r sequencer.Result) bool {
	switch {
	case r.Unit == "code":
		return !hasU(r.Unc.Expanded) && r.Value == math.Round(r.Value)
	case r.Unit == "number" && r.Quantity == "passes":
		return r.Value == math.Round(r.Value)
	}
	return false
}

// factor reports whether a plain number is a correction factor, written with
// six significant digits so that its difference from 1 shows (0.994507, not
// 0.995): a gain coefficient, or, in a result that does not say its quantity,
// a plain number within 10 % of 1.
func factor(r sequencer.Result) bool {
	if r.Unit != "number" {
		return false
	}
	switch r.Quantity {
	case "gain_coefficient":
		return true
	case "":
		return math.Abs(r.Value-1) < 0.1
	}
	return false
}

// fmtVolts writes a voltage with an SI prefix, or "—" when it is not a number.
func fmtVolts(v float64, digits int) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "—"
	}
	return pdfdoc.Minus(units.Format(v, "V", digits))
}

// Measurement uncertainty.
//
// A value and its expanded uncertainty U are written in one unit by the one
// rule of units.RoundU (JCGM 100:2008 §7.2.6): U with two significant digits,
// rounded up (it never makes the stated uncertainty smaller than the evaluated
// one; from metrology revision 1 on the record stores U already so rounded), and
// the value rounded to the same decimal place: "−3.2 µV ± 8.4 µV". A toleranced
// limit's numbers are written by its Decision's text methods, which its
// statement uses too.

// hasU reports whether U is an evaluated expanded uncertainty.
func hasU(U float64) bool { return U > 0 && finite(U) }

// fmtWithU writes "value ± U unit" with v and U in unit (a limit-file unit such as
// "uV" or "ppm"). Without an evaluated U, or for a count, it is fmtValue(v, unit).
func fmtWithU(v, U float64, unit string) string {
	if !finite(v) {
		return "not valid"
	}
	if !hasU(U) || isCount(unit) {
		return fmtValue(v, unit)
	}
	ur, dec := units.RoundU(U)
	if dec > 15 || dec < -15 { // no sensible fixed notation
		return strings.TrimSpace(fmtNum(v) + " ± " + fmtNum(U) + " " + dispUnit(unit))
	}
	return joinWithU(units.FormatAt(v, dec), units.FormatAt(ur, max(dec, 0)), unit)
}

// fmtDecisionWithU writes a toleranced limit's value with its U, in unit, as
// its decision statement writes them (Decision.ValueText, UText).
func fmtDecisionWithU(d *limits.Decision, unit string) string {
	if _, dec := units.RoundU(d.U); !finite(d.Value) || !hasU(d.U) || isCount(unit) || dec > 15 || dec < -15 {
		return fmtWithU(d.Value, d.U, unit)
	}
	return joinWithU(d.ValueText(), d.UText(), unit)
}

// joinWithU writes "v unit ± U unit", the unit once when it is long
// ("counts") and not at all when there is none.
func joinWithU(v, U, unit string) string {
	v, U = pdfdoc.Minus(v), pdfdoc.Minus(U)
	switch u := dispUnit(unit); u {
	case "":
		return v + " ± " + U
	case "counts": // a long unit, written once
		return v + " ± " + U + " " + u
	default:
		return v + " " + u + " ± " + U + " " + u
	}
}

// fmtK writes a coverage factor: "k = 2.00".
func fmtK(k float64) string {
	if !finite(k) || k <= 0 {
		return "k not stated"
	}
	return "k = " + strconv.FormatFloat(k, 'f', 2, 64)
}

// fmtDOF writes effective degrees of freedom as the decision statements do
// (units.FormatDOF): "νeff = 37", "νeff ≥ 1000", "νeff = ∞", or "" when not
// stated.
func fmtDOF(dof float64) string { return units.FormatDOF(dof) }

// uncLine is the small print under a value with its uncertainty: coverage factor,
// degrees of freedom and, when stated, the method. It is "U not evaluated" without
// an uncertainty.
func uncLine(U, k, dof float64, method string) string {
	if !hasU(U) {
		return "U not evaluated"
	}
	parts := []string{fmtK(k)}
	if s := fmtDOF(dof); s != "" {
		parts = append(parts, s)
	}
	if method != "" {
		parts = append(parts, method)
	}
	return strings.Join(parts, " · ")
}

// unitScale is the SI value of one unit as a limit file writes it ("uV" is 1e-6,
// "%" is 0.01, "code" and "" are 1), or 0 when the unit is not known.
func unitScale(unit string) float64 {
	u := strings.TrimSpace(unit)
	if u == "" {
		return 1
	}
	q, err := units.Parse("1" + u)
	if err != nil || q.Value == 0 || !finite(q.Value) {
		return 0
	}
	return q.Value
}

// resultUnit is the unit a result is written in on its own (outside a limit), in
// limit-file spelling, and the SI value of one of it: volts with the SI prefix that
// suits the larger of |value| and U, ratios in % from 1 % up and in ppm below,
// codes as codes.
func resultUnit(r sequencer.Result) (string, float64) {
	switch r.Unit {
	case "V", "A":
		m := math.Abs(r.Value)
		if hasU(r.Unc.Expanded) {
			m = math.Max(m, r.Unc.Expanded)
		}
		switch {
		case m >= 1 || !finite(m):
			return r.Unit, 1
		case m >= 1e-3:
			return "m" + r.Unit, 1e-3
		case m >= 1e-6 || m == 0:
			return "u" + r.Unit, 1e-6
		}
		return "n" + r.Unit, 1e-9
	case "ratio":
		if math.Abs(r.Value) >= 0.01 {
			return "%", 0.01
		}
		return "ppm", 1e-6
	case "code":
		return "code", 1
	case "number":
		return "", 1
	}
	return r.Unit, 1
}

// fmtResultU writes a result with its uncertainty, in the unit resultUnit picks.
func fmtResultU(r sequencer.Result) string {
	if !r.Valid || !finite(r.Value) {
		return "not valid"
	}
	r = shownResult(r)
	if !hasU(r.Unc.Expanded) {
		if tempcoQuantity(r.Quantity) {
			return fmtResult(r) + perDegree
		}
		return fmtResult(r)
	}
	unit, scale := resultUnit(r)
	if tempcoQuantity(r.Quantity) && unit != "" && !isCount(unit) {
		unit += perDegree
	}
	return fmtWithU(r.Value/scale, r.Unc.Expanded/scale, unit)
}

// fmtLimitNum writes a tolerance limit as the limit file gave it: the shortest
// decimal form.
func fmtLimitNum(v float64) string {
	if !finite(v) {
		return fmtNum(v)
	}
	a := math.Abs(v)
	if a != 0 && (a >= 1e9 || a < 1e-6) {
		return pdfdoc.Minus(strconv.FormatFloat(v, 'g', -1, 64))
	}
	return pdfdoc.Minus(strconv.FormatFloat(v, 'f', -1, 64))
}

// fmtInterval writes an interval with a unit: "−50 … 50 µV", one-sided "≤ 0.01 %"
// or "≥ 5 µV", or "—" when unbounded. num writes one end.
func fmtInterval(lo, hi *float64, unit string, num func(v float64, upper bool) string) string {
	u := dispUnit(unit)
	if isCount(unit) {
		u = ""
	}
	with := func(s string) string { return strings.TrimSpace(s + " " + u) }
	switch {
	case lo != nil && hi != nil:
		return with(num(*lo, false) + " … " + num(*hi, true))
	case hi != nil:
		return with("≤ " + num(*hi, true))
	case lo != nil:
		return with("≥ " + num(*lo, false))
	}
	return "—"
}

// fmtTolerance writes a decision's tolerance interval.
func fmtTolerance(d *limits.Decision, unit string) string {
	return fmtInterval(d.Lower, d.Upper, unit, func(v float64, _ bool) string { return fmtLimitNum(v) })
}

// fmtAcceptance writes a decision's acceptance interval as its statement does
// (Decision.AcceptText): exactly as computed from a stated U; from a U that was
// not stated (older records), one digit finer than U, rounded inward (the lower
// limit up, the upper down), so that the printed interval never claims more
// than the evaluated one.
func fmtAcceptance(d *limits.Decision, unit string) string {
	if lo, hi := d.AcceptLower, d.AcceptUpper; lo != nil && hi != nil && *lo > *hi {
		// A guard band wider than half the tolerance leaves no acceptance
		// interval, as the statement says: no inverted pair of numbers.
		return "none (2w > tolerance width)"
	}
	return fmtInterval(d.AcceptLower, d.AcceptUpper, unit, func(_ float64, upper bool) string { return pdfdoc.Minus(d.AcceptText(upper)) })
}

// fmtCoverage writes a coverage probability as a percentage: 0.9545 is "95.45 %".
func fmtCoverage(p float64) string {
	s := strconv.FormatFloat(p*100, 'f', 4, 64)
	s = strings.TrimRight(strings.TrimRight(s, "0"), ".")
	return s + " %"
}

// stage is when in the run a result was measured.
type stage int

const (
	stageFound stage = iota // before adjustment: as-found results and sweeps
	stageLeft               // after adjustment: as-left results and sweeps
	stageOther              // trim codes, or results of both stages
)

// stageOf is the stage of a set of result names, as the results table declares
// them: as found when every name is an as-found result, as left when every one is
// an as-left result, else other.
func stageOf(rec *sequencer.Record, names ...string) stage {
	if len(names) == 0 {
		return stageOther
	}
	first := rec.ResultStage(names[0])
	for _, n := range names[1:] {
		if rec.ResultStage(n) != first {
			return stageOther
		}
	}
	return certStage(first)
}

// outcomeStage is the stage of the results a limit judges.
func outcomeStage(rec *sequencer.Record, o limits.Outcome) stage {
	if o.Decision != nil && o.Decision.Result != "" {
		return stageOf(rec, o.Decision.Result)
	}
	names := append([]string(nil), o.Uses...)
	if len(names) == 0 {
		for k := range o.Values {
			names = append(names, k)
		}
	}
	return stageOf(rec, names...)
}

// stageWord is the short label of a stage.
func stageWord(s stage) string {
	switch s {
	case stageFound:
		return "as found"
	case stageLeft:
		return "as left"
	}
	return "—"
}

func yesNo(b bool) string {
	if b {
		return "yes"
	}
	return "no"
}

func plural(n int, one, many string) string {
	if n == 1 {
		return fmt.Sprintf("%d %s", n, one)
	}
	return fmt.Sprintf("%d %s", n, many)
}

// perDegree is the suffix of a temperature coefficient's unit.
const perDegree = "/°C"

// tempcoQuantity reports whether a result quantity is a temperature
// coefficient (sequencer.AdjustOffsetTC, AdjustGainTC): a value per °C,
// whose record unit (V, ratio) and limit unit (uV, ppm) leave out the "per °C".
func tempcoQuantity(q string) bool {
	return q == sequencer.AdjustOffsetTC || q == sequencer.AdjustGainTC
}

// shownOutcome is o as the certificate writes it: a limit on a temperature
// coefficient judges in its file's unit per °C ("unit: uV" on offset_tc is
// µV/°C), and prints so.
func (d *doc) shownOutcome(o limits.Outcome) limits.Outcome {
	if strings.TrimSpace(o.Unit) == "" || strings.HasSuffix(o.Unit, perDegree) || isCount(o.Unit) {
		return o
	}
	names := append([]string(nil), o.Uses...)
	for k := range o.Values {
		names = append(names, k)
	}
	if o.Decision != nil {
		names = append(names, o.Decision.Result)
	}
	for _, n := range names {
		if r, ok := d.resultIn(n, outcomeChannel(o)); ok && tempcoQuantity(r.Quantity) {
			o.Unit = strings.TrimSpace(o.Unit) + perDegree
			return o
		}
	}
	return o
}

// baseUnit is a shown outcome's unit without its "per °C", for scaling.
func baseUnit(unit string) string {
	return strings.TrimSuffix(unit, perDegree)
}

// perDegreeText writes each unit word of a statement made in unit (the limit
// file's, which limits writes as it is or in its printed form) per °C.
func perDegreeText(s, unit string) string {
	base := strings.TrimSpace(baseUnit(unit))
	words := []string{dispUnit(base)}
	if base != dispUnit(base) {
		words = append(words, base)
	}
	for _, w := range words {
		if w == "" {
			continue
		}
		re := regexp.MustCompile(` ` + regexp.QuoteMeta(w) + `([^\p{L}/]|$)`)
		s = re.ReplaceAllString(s, " "+w+perDegree+"$1")
	}
	return s
}
