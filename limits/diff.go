package limits

import (
	"fmt"
	"io"
	"strings"
	"text/tabwriter"
)

// Kinds of Change.
const (
	ChangeAdded     = "added"
	ChangeRemoved   = "removed"
	ChangeTightened = "tightened"     // the new accepted interval lies inside the old one
	ChangeLoosened  = "loosened"      // the old accepted interval lies inside the new one
	ChangeShifted   = "shifted"       // neither inside the other
	ChangeShape     = "changed shape" // toleranced ↔ expression, another result, one-sided ↔ two-sided, or an expression whose bounds cannot be read
	ChangeRule      = "rule changed"  // decision rule of a limit, or the file's decision section
)

const decisionRowMarker = "(decision)"

// Change is one semantic difference between two limit files (Diff).
type Change struct {
	Limit  string // the limit's name (the new file's spelling); empty for the file's decision section
	Kind   string // one of the Change constants
	Result string // the result(s) the limit judges, comma-separated
	// Accepted bounds in SI units, nil when unbounded on that side or not known (an
	// expression whose bounds cannot be read, a limit over several results, a rule
	// change).
	OldLower, OldUpper, NewLower, NewUpper *float64
	Unit                                   string // the limit's unit (the new file's; the old file's for a removed limit), for display
	Detail                                 string // what changed, in words
}

// Diff compares two limit sets limit by limit, matching limits by name ignoring case
// and runs of spaces, and returns what changed: changes to the decision section
// first, then the new file's limits in its order, then the removed limits in the
// old file's order. Unchanged limits are left out; a limit can give two changes
// (its bounds and its decision rule).
//
// A toleranced limit's bounds are compared in SI units, so 800 uV and 0.8 mV are the
// same: the new interval inside the old is tightened, the old inside the new
// loosened, neither shifted. A limit that became an expression or a tolerance,
// judges another result, or gained or lost a side has changed shape. An expression
// limit whose text changed is read as bounds when it has a simple form (x <= a,
// abs(x) <= a, within(x, a, b), a <= x && x <= b and conjunctions of such) and
// classified the same way (over several results: tightened when every result's
// interval is inside the old one, and so on); otherwise it has changed shape, and
// Detail gives both expressions. Changes of a toleranced limit's rule, guard factor
// or statements, and of the decision section (coverage, the default rule,
// conditional_pass, conditional_fail, min_tur, tur_policy) are ChangeRule. A nil
// set has no limits: every limit of the other is added or removed.
//
// Diff compares the sets as given: to compare variants, pass their effective sets
// (Set.Variant), say a file's base set and one of its variants, or the same
// variant of two releases.
func Diff(old, new *Set) []Change {
	var out []Change
	if old != nil && new != nil {
		out = append(out, policyChanges(old.Policy(), new.Policy())...)
	}
	oldBy := map[string]*Limit{}
	if old != nil {
		for _, l := range old.Limits {
			oldBy[nameKey(l.Name)] = l
		}
	}
	matched := map[string]bool{}
	if new != nil {
		for _, n := range new.Limits {
			k := nameKey(n.Name)
			o, ok := oldBy[k]
			if !ok {
				out = append(out, added(n, ChangeAdded))
				continue
			}
			matched[k] = true
			out = append(out, limitChanges(o, n)...)
		}
	}
	if old != nil {
		for _, o := range old.Limits {
			if !matched[nameKey(o.Name)] {
				out = append(out, added(o, ChangeRemoved))
			}
		}
	}
	return out
}

func nameKey(s string) string { return strings.ToLower(strings.Join(strings.Fields(s), " ")) }

// added describes a limit present in one file only.
func added(l *Limit, kind string) Change {
	c := Change{Limit: l.Name, Kind: kind, Result: strings.Join(l.Uses, ", "), Unit: l.Unit}
	b := l.box()
	if b.ok && len(b.names) == 1 {
		lo, hi := b.spans[b.names[0]].ptrs()
		if kind == ChangeAdded {
			c.NewLower, c.NewUpper = lo, hi
		} else {
			c.OldLower, c.OldUpper = lo, hi
		}
	}
	c.Detail = describe(l)
	return c
}

// describe says what a limit is: "tolerance −800 … 800 µV, guarded (r = 1),
// non-binary" or "expr abs(post_offset) <= 60 (uV)".
func describe(l *Limit) string {
	if l.Tolerance != nil {
		b := l.box()
		return "tolerance " + fmtSpan(l, b.spans[l.Uses[0]]) + ", " + ruleText(l.Tolerance)
	}
	u := ""
	if l.Unit != "" {
		u = " (" + l.Unit + ")"
	}
	return "expr " + oneLine(l.Expr) + u
}

func ruleText(t *Tolerance) string {
	s := t.Rule
	if t.Rule == RuleGuarded {
		s += " (r = " + fmtNum(t.GuardFactor) + ")"
	}
	if t.Binary {
		return s + ", binary"
	}
	return s + ", non-binary"
}

func limitChanges(o, n *Limit) []Change {
	c := Change{Limit: n.Name, Result: strings.Join(n.Uses, ", "), Unit: n.Unit}
	if o.Channel != n.Channel {
		// Another channel is other units' results: not a bound to compare.
		c.Kind = ChangeShape
		c.Detail = fmt.Sprintf("judges %s → %s: %s → %s", channelText(o.Channel), channelText(n.Channel), describe(o), describe(n))
		return []Change{c}
	}
	var notes []string
	if o.Unit != n.Unit {
		notes = append(notes, fmt.Sprintf("unit %s → %s", orNone(o.Unit), orNone(n.Unit)))
	}
	ob, nb := o.box(), n.box()
	nl := unitLimit(n.Unit)
	if nl == nil {
		nl = n
	}
	if ob.ok && nb.ok && len(ob.names) == 1 && len(nb.names) == 1 {
		c.OldLower, c.OldUpper = ob.spans[ob.names[0]].ptrs()
		c.NewLower, c.NewUpper = nb.spans[nb.names[0]].ptrs()
	}
	isTol := func(l *Limit) bool { return l.Tolerance != nil }
	var out []Change
	switch {
	case isTol(o) != isTol(n):
		c.Kind = ChangeShape
		what := func(l *Limit) string {
			if isTol(l) {
				return "toleranced"
			}
			return "expression"
		}
		d := fmt.Sprintf("%s → %s: %s → %s", what(o), what(n), describe(o), describe(n))
		if ob.ok && nb.ok && sameBox(ob, nb) {
			d += " (same bounds)"
		}
		c.Detail = join(append(notes, d))
		out = append(out, c)
		return out
	case !isTol(o) && oneLine(o.Expr) == oneLine(n.Expr) && o.Unit == n.Unit && strings.Join(o.Uses, ",") == strings.Join(n.Uses, ","):
		// the same expression: nothing to compare
	case ob.ok && nb.ok:
		kind, d := compareBoxes(ob, nb, nl)
		if kind != "" {
			c.Kind = kind
			c.Detail = join(append(notes, d))
			if !isTol(o) {
				c.Detail += fmt.Sprintf(" (expr %s → %s)", oneLine(o.Expr), oneLine(n.Expr))
			}
			out = append(out, c)
		}
	default: // expressions whose bounds cannot both be read
		c.Kind = ChangeShape
		c.OldLower, c.OldUpper, c.NewLower, c.NewUpper = nil, nil, nil, nil
		d := fmt.Sprintf("expr %s → %s", oneLine(o.Expr), oneLine(n.Expr))
		if oneLine(o.Expr) == oneLine(n.Expr) {
			d = "the same expression " + oneLine(o.Expr) + " reads its results in the new unit or uses"
		}
		c.Detail = join(append(notes, d))
		out = append(out, c)
	}
	if isTol(o) && isTol(n) {
		if d := toleranceRuleChanges(o.Tolerance, n.Tolerance); d != "" {
			out = append(out, Change{Limit: n.Name, Kind: ChangeRule, Result: c.Result, Unit: n.Unit, Detail: d})
		}
	}
	return out
}

func sameBox(a, b limitBox) bool {
	if len(a.names) != len(b.names) {
		return false
	}
	for _, n := range a.names {
		s, ok := b.spans[n]
		if !ok || !s.same(a.spans[n]) {
			return false
		}
	}
	return true
}

// compareBoxes classifies the change from box a to box b; kind is empty when they
// accept the same.
func compareBoxes(a, b limitBox, nl *Limit) (kind, detail string) {
	names := a.names
	if !sameNames(a, b) {
		return ChangeShape, fmt.Sprintf("results %s → %s", strings.Join(a.names, ", "), strings.Join(b.names, ", "))
	}
	tight, loose := true, true
	var parts []string
	for _, n := range names {
		o, nw := a.spans[n], b.spans[n]
		if o.sides() != nw.sides() {
			return ChangeShape, fmt.Sprintf("%s%s → %s: %s → %s", prefix(names, n), o.sides(), nw.sides(), fmtSpan(nl, o), fmtSpan(nl, nw))
		}
		if o.same(nw) {
			continue
		}
		tight = tight && nw.within(o)
		loose = loose && o.within(nw)
		parts = append(parts, prefix(names, n)+boundChange(nl, o, nw))
	}
	switch {
	case len(parts) == 0:
		return "", ""
	case tight:
		kind = ChangeTightened
	case loose:
		kind = ChangeLoosened
	default:
		kind = ChangeShifted
	}
	return kind, strings.Join(parts, "; ")
}

func sameNames(a, b limitBox) bool {
	if len(a.names) != len(b.names) {
		return false
	}
	for _, n := range a.names {
		if _, ok := b.spans[n]; !ok {
			return false
		}
	}
	return true
}

func prefix(names []string, n string) string {
	if len(names) == 1 {
		return ""
	}
	return n + " "
}

// boundChange says which bounds moved: "upper 800 → 600 µV".
func boundChange(l *Limit, o, n span) string {
	u := ""
	if l != nil && l.Unit != "" {
		u = " " + dispUnit(l.Unit)
	}
	var parts []string
	if !eq(o.lo, n.lo) {
		parts = append(parts, "lower "+fmtIn(l, o.lo)+" → "+fmtIn(l, n.lo)+u)
	}
	if !eq(o.hi, n.hi) {
		parts = append(parts, "upper "+fmtIn(l, o.hi)+" → "+fmtIn(l, n.hi)+u)
	}
	return strings.Join(parts, ", ")
}

func toleranceRuleChanges(o, n *Tolerance) string {
	var d []string
	if o.Rule != n.Rule {
		d = append(d, "rule "+o.Rule+" → "+n.Rule)
	}
	if o.Rule == RuleGuarded && n.Rule == RuleGuarded && o.GuardFactor != n.GuardFactor {
		d = append(d, "guard_factor "+fmtNum(o.GuardFactor)+" → "+fmtNum(n.GuardFactor))
	}
	if o.Binary != n.Binary {
		d = append(d, "statements "+statements(o.Binary)+" → "+statements(n.Binary))
	}
	return join(d)
}

func statements(binary bool) string {
	if binary {
		return "binary"
	}
	return "non-binary"
}

func policyChanges(o, n Policy) []Change {
	var d []string
	add := func(key, a, b string) {
		if a != b {
			d = append(d, key+" "+a+" → "+b)
		}
	}
	add("coverage", fmtNum(o.Coverage*100)+" %", fmtNum(n.Coverage*100)+" %")
	add("rule", o.Rule, n.Rule)
	add("guard_factor", fmtNum(o.GuardFactor), fmtNum(n.GuardFactor))
	add("statements", statements(o.Binary), statements(n.Binary))
	add("conditional_pass", o.ConditionalPass, n.ConditionalPass)
	add("conditional_fail", o.ConditionalFail, n.ConditionalFail)
	add("min_tur", fmtNum(o.MinTUR)+":1", fmtNum(n.MinTUR)+":1")
	add("tur_policy", o.TURPolicy, n.TURPolicy)
	if len(d) == 0 {
		return nil
	}
	return []Change{{Kind: ChangeRule, Detail: "decision section: " + join(d)}}
}

func join(parts []string) string {
	var keep []string
	for _, p := range parts {
		if p != "" {
			keep = append(keep, p)
		}
	}
	return strings.Join(keep, "; ")
}

func orNone(u string) string {
	if u == "" {
		return `""`
	}
	return u
}

// FormatDiff writes changes as a table, one row per change: the limit, the kind of
// change, the result, the old and new accepted bounds in the limit's unit, and the
// detail. Nothing is written for no changes but a line saying so.
func FormatDiff(w io.Writer, changes []Change) {
	if len(changes) == 0 {
		fmt.Fprintln(w, "no changes")
		return
	}
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "LIMIT\tCHANGE\tRESULT\tOLD\tNEW\tDETAIL")
	for _, c := range changes {
		l := unitLimit(c.Unit)
		name := c.Limit
		if name == "" {
			name = decisionRowMarker
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t%s\n", name, c.Kind, orDash(c.Result),
			boundsCell(l, c, c.OldLower, c.OldUpper, c.Kind == ChangeAdded),
			boundsCell(l, c, c.NewLower, c.NewUpper, c.Kind == ChangeRemoved), c.Detail)
	}
	tw.Flush()
}

func boundsCell(l *Limit, c Change, lo, hi *float64, absent bool) string {
	if absent {
		return "(none)"
	}
	if lo == nil && hi == nil {
		return "—"
	}
	s := whole
	if lo != nil {
		s.lo = *lo
	}
	if hi != nil {
		s.hi = *hi
	}
	return fmtSpan(l, s)
}

func orDash(s string) string {
	if s == "" {
		return "—"
	}
	return s
}

// channelText names the channels a limit judges: its channel, or every one.
func channelText(ch string) string {
	if ch == "" {
		return "every channel"
	}
	return "channel " + ch
}
