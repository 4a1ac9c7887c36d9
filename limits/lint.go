package limits

import (
	"fmt"
	"math"
	"sort"
	"strings"

	exprast "github.com/expr-lang/expr/ast"
	"github.com/expr-lang/expr/parser"
	"github.com/expr-lang/expr/vm"

	"trimline/instruments/files"
	"trimline/instruments/units"
)

// Finding severities.
const (
	SeverityError   = "error"   // the file will not load, or a limit cannot do its job
	SeverityWarning = "warning" // the file loads, but something in it is likely a mistake
)

// Finding is one problem Lint found in a limit file.
type Finding struct {
	File      string
	Line, Col int    // 1-based; 0 when not known
	Severity  string // SeverityError or SeverityWarning
	Code      string // short id: "load", "unknown-result", "never-passes", ...
	Msg       string
}

// Error returns "file:line:col: severity: msg".
func (f Finding) Error() string {
	if f.Line == 0 {
		return fmt.Sprintf("%s: %s: %s", f.File, f.Severity, f.Msg)
	}
	return fmt.Sprintf("%s:%d:%d: %s: %s", f.File, f.Line, f.Col, f.Severity, f.Msg)
}

// LintOptions are what Lint knows about the station beyond the file.
type LintOptions struct {
	// Ranges is the physical range of each result in SI units, {low, high}: what
	// the station can produce at all (post_offset −5 … 5 V, a 12-bit code 0 … 4095).
	// The never-passes and never-fails checks run only for results listed here.
	Ranges map[string][2]float64
	// TUR is the predicted measurement uncertainty of each result, as for
	// Set.PredictTUR. The TUR check runs only for results listed here.
	TUR map[string]Value
}

// Codes of Finding.
const (
	CodeLoad          = "load"           // any other problem that stops Load
	CodeUnknownResult = "unknown-result" // uses names a result the engine does not produce (stops Load)
	CodeUnitMismatch  = "unit-mismatch"  // the unit does not fit the result's dimension (stops Load)
	CodeNoDescription = "no-description" // description missing or empty (stops Load)
	CodeNeverPasses   = "never-passes"   // no value in the result's physical range passes
	CodeNeverFails    = "never-fails"    // every value in the result's physical range passes
	CodeContradictory = "contradictory"  // two limits on one result whose accepted intervals do not meet
	CodeRedundant     = "redundant"      // a limit's accepted interval contains another's on the same result
	CodeOverlap       = "overlap"        // two limits on one result that overlap in part: the tighter edges decide
	CodeTURLow        = "tur-low"        // the tolerance is tighter than the station can verify (below min_tur)
	CodeTURUnknown    = "tur-unknown"    // an uncertainty was given for the result but it is unusable
	CodeDescription   = "weak-description"
	CodeBareRatio     = "bare-ratio" // a ratio judged as a plain fraction (unit "")
)

// gridPoints is the number of evenly spaced values of each result at which an
// expression limit is tried over the result's physical range.
const gridPoints = 201

// Lint checks the limit file data (called name in findings) as a quality engineer
// would before release, and returns what it found sorted by position.
//
// Every problem Load reports is an error finding (unknown result names, units that
// do not fit, empty descriptions and the rest; Code says which). The limits that
// have no such problem are then checked:
//
//   - never-passes (error) and never-fails (warning), for results in opt.Ranges: a
//     tolerance entirely outside the result's physical range, or covering all of
//     it; an expression limit over one or two results is evaluated on a grid of
//     201 values per result across their ranges, plus the constants written in the
//     expression and the midpoints between them, and reported when it gives the
//     same answer everywhere (an expression over more results is not tried);
//   - two limits on one result (toleranced, or expressions read as bounds as Diff
//     does) whose accepted intervals do not meet: contradictory (error), no unit can
//     pass both; one inside the other: the wider is redundant (warning); overlapping
//     in part (warning);
//   - for results in opt.TUR, a two-sided tolerance whose predicted TUR is below
//     the file's min_tur (Set.PredictTUR): warning, or error under tur_policy:
//     refuse, where the station will not pass units on it;
//   - a description that only repeats the name, and a ratio judged with the empty
//     unit (as a plain fraction) rather than % or ppm: warnings.
//
// Every variant's effective set (Set.Variant) is then checked the same way for
// what the variant changes: its overridden and added limits, the pairs of limits
// that involve one of them, and its TUR (all its toleranced limits when it changes
// coverage, min_tur or tur_policy). Those findings begin "variant NAME: " and point
// at the variant's lines where it has them.
//
// Findings about one limit point at its entry ("- name: ..."), at its tolerance or
// the offending bound, or at its expression. Lint is safe for concurrent use.
func Lint(name string, data []byte, cat Catalog, opt LintOptions) []Finding {
	set, errs, doc := load(name, data, cat)
	var out []Finding
	for _, e := range errs {
		out = append(out, Finding{File: e.File, Line: e.Line, Col: e.Col, Severity: SeverityError, Code: loadCode(e.Msg), Msg: e.Msg})
	}
	if set == nil || doc == nil {
		return out
	}
	lt := &linter{name: name, doc: doc, set: set, cat: cat, opt: opt}
	for _, l := range set.Limits {
		if !l.sound {
			continue
		}
		lt.words(l)
		lt.reach(l)
	}
	lt.pairs()
	lt.tur(len(errs) == 0)
	out = append(out, lt.out...)
	if set.variants != nil {
		for _, v := range set.variants.list {
			vt := &linter{name: name, doc: doc, set: v.set, cat: cat, opt: opt, base: set}
			vt.variant(len(errs) == 0)
			out = append(out, vt.out...)
		}
	}
	files.SortByPosition(out, func(f Finding) (string, int, int) { return f.File, f.Line, f.Col })
	return out
}

// loadCode names a Load problem from its message.
func loadCode(msg string) string {
	switch {
	case strings.HasPrefix(msg, "unknown result name"), strings.HasPrefix(msg, "expression uses unknown name"):
		return CodeUnknownResult
	case strings.HasPrefix(msg, "unit ") && strings.Contains(msg, "but result"):
		return CodeUnitMismatch
	case msg == `missing required key "description"`, msg == `"description" is empty`, msg == `"description" has no value`:
		return CodeNoDescription
	}
	return CodeLoad
}

type linter struct {
	name string
	doc  *files.Doc
	set  *Set
	cat  Catalog
	opt  LintOptions
	out  []Finding
	base *Set // the base set, when set is a variant's effective set
}

func (lt *linter) add(p place, sev, code, format string, args ...any) {
	msg := fmt.Sprintf(format, args...)
	if lt.set.VariantName != "" {
		msg = fmt.Sprintf("variant %q: %s", lt.set.VariantName, msg)
	}
	lt.out = append(lt.out, Finding{File: lt.name, Line: p.line, Col: p.col, Severity: sev, Code: code, Msg: msg})
}

// own reports whether l is the variant's own: overridden or added by it, rather
// than a limit of the base list (which the base set's lint has checked).
func (lt *linter) own(l *Limit) bool {
	return lt.base == nil || l.src != nil && (l.src.over != "" || strings.HasPrefix(l.src.base, "$.variants"))
}

// variant lints a variant's effective set for what the variant changes: its own
// limits (an override's description and unit checks only when it gives them, its
// reach only when it changes the bounds), every pair of limits on one result of
// which one is its own, and the TUR of its own toleranced limits, or of all of
// them when it changes coverage, min_tur or tur_policy.
func (lt *linter) variant(policyKnown bool) {
	for _, l := range lt.set.Limits {
		if !l.sound || !lt.own(l) {
			continue
		}
		s := l.src
		if s.over == "" || s.gives("description") || s.gives("unit") || s.gives("uses") {
			lt.words(l)
		}
		if s.over == "" || s.gives("unit") || s.gives("uses") || s.gives("expr") || s.gives("tolerance") {
			lt.reach(l)
		}
	}
	lt.pairs()
	lt.tur(policyKnown)
}

// at returns the position of key (or "key.sub") of the limit, or of its entry
// (the variant's override entry, for an overridden limit) when key is "" or absent.
func (lt *linter) at(l *Limit, key string) place {
	if l.src == nil {
		return place{l.Line, l.col}
	}
	if key == "" || !lt.doc.Has(l.src.path(key)) {
		return l.src.entry()
	}
	line, col := lt.doc.Pos(l.src.path(key))
	return place{line, col}
}

func (lt *linter) rangeOf(result string) (span, bool) {
	r, ok := lt.opt.Ranges[result]
	if !ok || math.IsNaN(r[0]) || math.IsNaN(r[1]) {
		return span{}, false
	}
	if r[0] > r[1] {
		r[0], r[1] = r[1], r[0]
	}
	return span{r[0], r[1]}, true
}

// words checks the description and the unit.
func (lt *linter) words(l *Limit) {
	over := lt.base != nil && l.src != nil && l.src.over != ""
	weak := nameKey(l.Description) == nameKey(l.Name) || len(strings.Fields(l.Description)) < 2 && len(l.Description) < 12
	if weak && (!over || l.src.gives("description")) {
		lt.add(lt.at(l, "description"), SeverityWarning, CodeDescription,
			"limit %q: description %q does not say what the limit is for; write what is measured and why it matters", l.Name, l.Description)
	}
	if l.Unit == "" && (!over || l.src.gives("unit") || l.src.gives("uses")) {
		for _, n := range l.Uses {
			if lt.cat[n] == units.Ratio {
				lt.add(lt.at(l, "unit"), SeverityWarning, CodeBareRatio,
					"limit %q judges the ratio %s as a plain fraction (unit \"\"): write its numbers in %% or ppm so 0.05 %% is not read as 5 %%", l.Name, n)
				break
			}
		}
	}
}

// reach checks whether a limit can pass, and fail, over the physical range.
func (lt *linter) reach(l *Limit) {
	if l.Tolerance != nil {
		lt.reachTolerance(l)
		return
	}
	lt.reachExpr(l)
}

func (lt *linter) reachTolerance(l *Limit) {
	res := l.Uses[0]
	r, ok := lt.rangeOf(res)
	if !ok {
		return
	}
	tol := l.box().spans[res]
	rng := fmtSpan(l, r)
	switch {
	case tol.upper() && tol.hi < r.lo:
		lt.add(lt.at(l, "tolerance.upper"), SeverityError, CodeNeverPasses,
			"limit %q can never pass: its upper tolerance %s is below the physical range of %s (%s)", l.Name, fmtIn(l, tol.hi)+unitSuffix(l), res, rng)
	case tol.lower() && tol.lo > r.hi:
		lt.add(lt.at(l, "tolerance.lower"), SeverityError, CodeNeverPasses,
			"limit %q can never pass: its lower tolerance %s is above the physical range of %s (%s)", l.Name, fmtIn(l, tol.lo)+unitSuffix(l), res, rng)
	case r.within(tol):
		lt.add(lt.at(l, "tolerance"), SeverityWarning, CodeNeverFails,
			"limit %q can never fail: its tolerance %s covers the whole physical range of %s (%s)", l.Name, fmtSpan(l, tol), res, rng)
	}
}

func unitSuffix(l *Limit) string {
	if l.Unit == "" {
		return ""
	}
	return " " + dispUnit(l.Unit)
}

// reachExpr evaluates an expression limit over a grid of its results' ranges.
func (lt *linter) reachExpr(l *Limit) {
	if l.prog == nil || len(l.Uses) == 0 || len(l.Uses) > 2 {
		return
	}
	axes := make([][]float64, len(l.Uses))
	var rngs []string
	consts := exprConstants(l.Expr)
	for i, n := range l.Uses {
		r, ok := lt.rangeOf(n)
		if !ok {
			return
		}
		axes[i] = gridAxis(r, l, consts)
		rngs = append(rngs, fmt.Sprintf("%s %s", n, fmtSpan(l, r)))
	}
	env := make(map[string]any, len(l.Uses))
	m := new(vm.VM)
	var sawTrue, sawFalse bool
	try := func() {
		out, err := m.Run(l.prog, env)
		if p, ok := out.(bool); err == nil && ok && p {
			sawTrue = true
		} else {
			sawFalse = true
		}
	}
	for _, a := range axes[0] {
		env[l.Uses[0]] = a
		if len(axes) == 1 {
			try()
			continue
		}
		for _, b := range axes[1] {
			env[l.Uses[1]] = b
			try()
			if sawTrue && sawFalse {
				return
			}
		}
		if sawTrue && sawFalse {
			return
		}
	}
	over := strings.Join(rngs, " and ")
	switch {
	case !sawTrue:
		lt.add(lt.at(l, "expr"), SeverityError, CodeNeverPasses,
			"limit %q can never pass: %s is false everywhere over the physical range (%s)", l.Name, oneLine(l.Expr), over)
	case !sawFalse:
		lt.add(lt.at(l, "expr"), SeverityWarning, CodeNeverFails,
			"limit %q can never fail: %s is true everywhere over the physical range (%s)", l.Name, oneLine(l.Expr), over)
	}
}

// gridAxis returns values of one result in the limit's unit: gridPoints evenly
// spaced over r (SI), the expression's constants inside r and the midpoints
// between neighbours, sorted.
func gridAxis(r span, l *Limit, consts []float64) []float64 {
	lo, hi := l.inUnit(r.lo), l.inUnit(r.hi)
	pts := make([]float64, 0, gridPoints+2*len(consts))
	for k := range gridPoints {
		pts = append(pts, lo+(hi-lo)*float64(k)/float64(gridPoints-1))
	}
	for _, c := range consts {
		if c >= lo && c <= hi {
			pts = append(pts, c)
		}
	}
	sort.Float64s(pts)
	n := len(pts)
	for k := 1; k < n; k++ {
		if pts[k] != pts[k-1] {
			pts = append(pts, (pts[k]+pts[k-1])/2)
		}
	}
	sort.Float64s(pts)
	return pts
}

// exprConstants returns the numbers written in an expression (negated ones as
// negative numbers).
func exprConstants(src string) []float64 {
	tree, err := parser.Parse(src)
	if err != nil {
		return nil
	}
	var out []float64
	exprast.Walk(&tree.Node, walker(func(n exprast.Node) {
		if v, ok := constNumber(n); ok {
			out = append(out, v, -v)
		}
	}))
	return out
}

// bounded is a limit read as bounds on one result.
type bounded struct {
	l *Limit
	s span
}

// pairs checks every two limits that bound the same result.
func (lt *linter) pairs() {
	byResult := map[string][]bounded{}
	var order []string
	for _, l := range lt.set.Limits {
		if !l.sound {
			continue
		}
		b := l.box()
		if !b.ok || len(b.names) != 1 {
			continue
		}
		r := b.names[0]
		if _, seen := byResult[r]; !seen {
			order = append(order, r)
		}
		byResult[r] = append(byResult[r], bounded{l, b.spans[r]})
	}
	for _, r := range order {
		ls := byResult[r]
		for j := 1; j < len(ls); j++ {
			for i := range j {
				if lt.own(ls[i].l) || lt.own(ls[j].l) {
					lt.pair(r, ls[i], ls[j])
				}
			}
		}
	}
}

// pair compares two limits a (earlier in the file) and b on result r; findings
// point at b's entry.
func (lt *linter) pair(r string, a, b bounded) {
	if a.l.Channel != "" && b.l.Channel != "" && a.l.Channel != b.l.Channel {
		return // they judge different channels
	}
	at := lt.at(b.l, "")
	if !lt.own(b.l) { // in a variant, at the limit the variant changed
		at = lt.at(a.l, "")
	}
	q := func(x bounded) string {
		return fmt.Sprintf("%q (line %d, %s)", x.l.Name, lt.at(x.l, "").line, fmtSpan(x.l, x.s))
	}
	rules := ""
	if a.l.Tolerance != nil && b.l.Tolerance != nil && ruleText(a.l.Tolerance) != ruleText(b.l.Tolerance) {
		rules = fmt.Sprintf("; their decision rules differ (%s, %s): check which verdict is meant", ruleText(a.l.Tolerance), ruleText(b.l.Tolerance))
	}
	// A limit of one channel beside a limit of every channel: the narrower one
	// on that channel does not make the wider one redundant, for the wider
	// still judges the other channels.
	partial := func(wider, narrower bounded) bool { return wider.l.Channel == "" && narrower.l.Channel != "" }
	switch {
	case a.s.intersect(b.s).empty():
		lt.add(at, SeverityError, CodeContradictory,
			"limits %s and %s on %s contradict each other: no value passes both, so every unit fails", q(a), q(b), r)
	case a.l.Channel != b.l.Channel && (a.s.same(b.s) || b.s.within(a.s) && partial(a, b) || a.s.within(b.s) && partial(b, a)):
		// a channel held to the same or tighter bounds than every channel is: by design
	case a.s.same(b.s):
		lt.add(at, SeverityWarning, CodeRedundant,
			"limit %q repeats the bounds of %s on %s: one of them is redundant%s", b.l.Name, q(a), r, rules)
	case b.s.within(a.s):
		lt.add(at, SeverityWarning, CodeRedundant,
			"limit %s on %s lies inside %s: the wider one is redundant%s", q(b), r, q(a), rules)
	case a.s.within(b.s):
		lt.add(at, SeverityWarning, CodeRedundant,
			"limit %s on %s contains %s: it is redundant%s", q(b), r, q(a), rules)
	default:
		lt.add(at, SeverityWarning, CodeOverlap,
			"limits %s and %s on %s overlap in part: only %s passes both%s", q(a), q(b), r, fmtSpan(b.l, a.s.intersect(b.s)), rules)
	}
}

// tur checks the predicted TUR of the two-sided toleranced limits whose result has
// an uncertainty in opt.TUR. policyKnown is false when the file had problems, so
// tur_policy may not be what the file meant.
func (lt *linter) tur(policyKnown bool) {
	if len(lt.opt.TUR) == 0 {
		return
	}
	sound := &Set{policy: lt.set.policy, channels: lt.set.channels, perChannel: lt.set.perChannel}
	byName := map[string]*Limit{}
	all := true
	if lt.base != nil {
		p, b := lt.set.Policy(), lt.base.Policy()
		all = p.Coverage != b.Coverage || p.MinTUR != b.MinTUR || p.TURPolicy != b.TURPolicy
	}
	for _, l := range lt.set.Limits {
		if l.sound && l.Tolerance != nil && (all || lt.own(l)) {
			sound.Limits = append(sound.Limits, l)
			byName[l.Name] = l
		}
	}
	pol := sound.Policy()
	for _, c := range sound.PredictTUR(lt.opt.TUR) {
		l := byName[c.Limit]
		if _, given := lt.opt.TUR[c.Result]; !given || c.OneSided || !c.Low {
			continue
		}
		if c.TUR == 0 {
			lt.add(lt.at(l, "tolerance"), SeverityWarning, CodeTURUnknown, "limit %q: %s", l.Name, c.Note)
			continue
		}
		sev, then := SeverityWarning, "the station records it (tur_policy: warn)"
		if pol.TURPolicy == TURRefuse && policyKnown {
			sev, then = SeverityError, "no unit can pass it (tur_policy: refuse turns every pass into review)"
		}
		lt.add(lt.at(l, "tolerance"), sev, CodeTURLow,
			"limit %q: tolerance %s is tighter than the station can verify: %s; %s", l.Name, fmtSpan(l, l.box().spans[c.Result]), c.Note, then)
	}
}
