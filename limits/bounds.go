package limits

import (
	"math"
	"strings"

	exprast "github.com/expr-lang/expr/ast"
	"github.com/expr-lang/expr/parser"

	"trimline/instruments/units"
)

// span is a closed interval of one result in SI units; lo is −Inf or hi +Inf when
// unbounded on that side.
type span struct{ lo, hi float64 }

var whole = span{math.Inf(-1), math.Inf(1)}

func (a span) intersect(b span) span { return span{math.Max(a.lo, b.lo), math.Min(a.hi, b.hi)} }
func (a span) empty() bool           { return a.lo > a.hi }
func (a span) lower() bool           { return !math.IsInf(a.lo, -1) }
func (a span) upper() bool           { return !math.IsInf(a.hi, 1) }

// sides tells which sides are bounded: "two-sided", "lower only", "upper only".
func (a span) sides() string {
	switch {
	case a.lower() && a.upper():
		return "two-sided"
	case a.lower():
		return "lower only"
	case a.upper():
		return "upper only"
	}
	return "unbounded"
}

// within reports whether a ⊆ b, allowing for rounding in the last digits.
func (a span) within(b span) bool { return leq(b.lo, a.lo) && leq(a.hi, b.hi) }

func (a span) same(b span) bool { return eq(a.lo, b.lo) && eq(a.hi, b.hi) }

func eq(x, y float64) bool { return leq(x, y) && leq(y, x) }

// leq is x ≤ y, or equal to about 12 significant digits.
func leq(x, y float64) bool {
	if x <= y {
		return true
	}
	return !math.IsInf(x, 0) && !math.IsInf(y, 0) && x-y <= 1e-12*math.Max(math.Abs(x), math.Abs(y))
}

func (a span) ptrs() (lo, hi *float64) {
	if a.lower() {
		lo = ptr(a.lo)
	}
	if a.upper() {
		hi = ptr(a.hi)
	}
	return lo, hi
}

// limitBox is what a limit accepts when it can be read as bounds on its results,
// each in SI: a toleranced limit's tolerance, or an expression that is a
// conjunction of simple comparisons (x <= a, a < x, x == a, abs(x) <= a,
// within(x, a, b), joined by && or and). Strict and non-strict comparisons give the
// same bound. ok is false for any other expression.
type limitBox struct {
	names []string // results bounded, in the order first met
	spans map[string]span
	ok    bool
	tol   bool // from a tolerance
}

func (l *Limit) box() limitBox {
	if l.Tolerance != nil && len(l.Uses) == 1 {
		s := whole
		if l.Tolerance.Lower != nil {
			s.lo = l.toSI(*l.Tolerance.Lower)
		}
		if l.Tolerance.Upper != nil {
			s.hi = l.toSI(*l.Tolerance.Upper)
		}
		return limitBox{names: []string{l.Uses[0]}, spans: map[string]span{l.Uses[0]: s}, ok: true, tol: true}
	}
	if l.Expr == "" {
		return limitBox{}
	}
	tree, err := parser.Parse(l.Expr)
	if err != nil {
		return limitBox{}
	}
	b := limitBox{spans: map[string]span{}, ok: true}
	uses := map[string]bool{}
	for _, n := range l.Uses {
		uses[n] = true
	}
	add := func(name string, s span) {
		if !uses[name] {
			b.ok = false
			return
		}
		old, seen := b.spans[name]
		if !seen {
			b.names = append(b.names, name)
			old = whole
		}
		b.spans[name] = old.intersect(s)
	}
	var walk func(n exprast.Node)
	walk = func(n exprast.Node) {
		if !b.ok {
			return
		}
		switch n := n.(type) {
		case *exprast.BinaryNode:
			switch n.Operator {
			case "&&", "and":
				walk(n.Left)
				walk(n.Right)
				return
			}
			name, s, ok := l.comparison(n)
			if !ok {
				b.ok = false
				return
			}
			add(name, s)
		case *exprast.CallNode:
			id, isID := n.Callee.(*exprast.IdentifierNode)
			if !isID || id.Value != "within" || len(n.Arguments) != 3 {
				b.ok = false
				return
			}
			x, isX := n.Arguments[0].(*exprast.IdentifierNode)
			lo, lok := constNumber(n.Arguments[1])
			hi, hok := constNumber(n.Arguments[2])
			if !isX || !lok || !hok {
				b.ok = false
				return
			}
			add(x.Value, span{l.toSI(lo), l.toSI(hi)})
		default:
			b.ok = false
		}
	}
	walk(tree.Node)
	if len(b.names) == 0 {
		b.ok = false
	}
	return b
}

// comparison reads x OP a, a OP x or abs(x) OP a (OP one of < <= > >= ==) as the
// span of x it accepts.
func (l *Limit) comparison(n *exprast.BinaryNode) (string, span, bool) {
	op := n.Operator
	left, right := n.Left, n.Right
	c, cok := constNumber(right)
	if !cok { // a OP x: turn it round
		c, cok = constNumber(left)
		left = right
		op = map[string]string{"<": ">", "<=": ">=", ">": "<", ">=": "<=", "==": "=="}[op]
	}
	if !cok || op == "" {
		return "", span{}, false
	}
	v := l.toSI(c)
	absOf := false
	if bn, isB := left.(*exprast.BuiltinNode); isB && bn.Name == "abs" && len(bn.Arguments) == 1 {
		left, absOf = bn.Arguments[0], true
	}
	id, isID := left.(*exprast.IdentifierNode)
	if !isID {
		return "", span{}, false
	}
	if absOf {
		if op != "<" && op != "<=" {
			return "", span{}, false
		}
		return id.Value, span{-v, v}, true
	}
	s := whole
	switch op {
	case "<", "<=":
		s.hi = v
	case ">", ">=":
		s.lo = v
	case "==":
		s = span{v, v}
	default:
		return "", span{}, false
	}
	return id.Value, s, true
}

// unitLimit returns a Limit that only converts between SI and unit u (for
// display), or nil when u is not a unit.
func unitLimit(u string) *Limit {
	l := &Limit{Unit: u}
	if u == "" {
		l.setScale(1)
		return l
	}
	q, err := units.Parse("1 " + u)
	if err != nil || !(q.Value > 0) {
		return nil
	}
	l.setScale(q.Value)
	return l
}

// fmtIn writes v (SI) in the unit of l, which may be nil (then SI).
func fmtIn(l *Limit, v float64) string {
	if l == nil {
		return fmtNum(v)
	}
	return fmtNum(l.inUnit(v))
}

// fmtSpan writes s in the unit of l: "−800 … 800 µV", "≤ 60 µV", "≥ 100 code".
func fmtSpan(l *Limit, s span) string {
	u := ""
	if l != nil {
		u = dispUnit(l.Unit)
	}
	var t string
	switch {
	case s.lower() && s.upper() && s.lo == s.hi:
		t = "= " + fmtIn(l, s.lo)
	case s.lower() && s.upper():
		t = fmtIn(l, s.lo) + " … " + fmtIn(l, s.hi)
	case s.lower():
		t = "≥ " + fmtIn(l, s.lo)
	case s.upper():
		t = "≤ " + fmtIn(l, s.hi)
	default:
		return "any"
	}
	return strings.TrimSpace(t + " " + u)
}

// Bound is what one limit accepts of one result, read as bounds in SI units: a
// toleranced limit's tolerance, or an expression read as bounds as Diff reads it.
type Bound struct {
	Limit, Result string
	Unit          string   // the limit's unit, for display
	Lower, Upper  *float64 // SI; nil = unbounded on that side
}

// Bounds lists, in file order, the limits of s that can be read as bounds on
// exactly one result, with those bounds.
func (s *Set) Bounds() []Bound {
	if s == nil {
		return nil
	}
	var out []Bound
	for _, l := range s.Limits {
		b := l.box()
		if !b.ok || len(b.names) != 1 {
			continue
		}
		r := b.names[0]
		lo, hi := b.spans[r].ptrs()
		out = append(out, Bound{Limit: l.Name, Result: r, Unit: l.Unit, Lower: lo, Upper: hi})
	}
	return out
}

// InUnit converts v (SI) to unit the way a limit written in that unit sees it: a
// decimal shift for powers of ten, so 1.23e-5 V is exactly 12.3 uV. An unknown
// unit leaves v as it is.
func InUnit(v float64, unit string) float64 {
	l := unitLimit(unit)
	if l == nil {
		return v
	}
	return l.inUnit(v)
}
