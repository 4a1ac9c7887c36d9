package limits

import (
	"fmt"
	"math"
	"strconv"
	"strings"
)

// decisionForm is the file's optional decision section.
type decisionForm struct {
	Coverage        *string  `yaml:"coverage"`
	Rule            *string  `yaml:"rule"`
	GuardFactor     *float64 `yaml:"guard_factor"`
	Statements      *string  `yaml:"statements"`
	ConditionalPass *string  `yaml:"conditional_pass"`
	ConditionalFail *string  `yaml:"conditional_fail"`
	MinTUR          *string  `yaml:"min_tur"`
	TURPolicy       *string  `yaml:"tur_policy"`
}

// toleranceForm is a toleranced limit's tolerance: plain numbers in the limit's
// unit, read as text so that a mistake gets a message in words.
type toleranceForm struct {
	Lower *string `yaml:"lower"`
	Upper *string `yaml:"upper"`
}

var (
	ruleWords       = []string{RuleSimple, RuleGuarded}
	statementWords  = []string{"binary", "non-binary"}
	condPassWords   = []string{ShipConditional, VerdictReview, VerdictFail}
	condFailWords   = []string{VerdictFail, VerdictReview}
	turPolicyWords  = []string{TURWarn, TURRefuse}
	decisionKeyHelp = "coverage, rule, guard_factor, statements, conditional_pass, conditional_fail, min_tur, tur_policy"
)

// decision checks the decision section and fills l.policy (which starts as the
// defaults).
func (l *loader) decision(f *decisionForm) {
	l.decisionAt("$.decision", f, &l.policy)
}

// decisionAt checks the decision section f found at path (the file's, or a
// variant's) and sets the keys it gives in p. It reports whether f had no problem.
func (l *loader) decisionAt(path string, f *decisionForm, p *Policy) bool {
	before := len(l.errs)
	if f == nil {
		if l.doc.Has(path) {
			l.errs = append(l.errs, l.doc.KeyErrorf(path, "\"decision\" has no value: give some of %s, or remove it", decisionKeyHelp))
		}
		return len(l.errs) == before
	}
	if s, ok := l.present(path, "coverage", f.Coverage); ok {
		if c, ok := l.coverage(path+".coverage", s); ok {
			p.Coverage = c
		}
	}
	if w, ok := l.word(path, "rule", f.Rule, ruleWords); ok {
		p.Rule = w
	}
	if r, ok := l.guardFactor(path, f.GuardFactor); ok {
		p.GuardFactor = r
	}
	if w, ok := l.word(path, "statements", f.Statements, statementWords); ok {
		p.Binary = w == "binary"
	}
	if w, ok := l.word(path, "conditional_pass", f.ConditionalPass, condPassWords); ok {
		p.ConditionalPass = w
	}
	if w, ok := l.word(path, "conditional_fail", f.ConditionalFail, condFailWords); ok {
		p.ConditionalFail = w
	}
	if s, ok := l.present(path, "min_tur", f.MinTUR); ok {
		if m, ok := l.minTUR(path+".min_tur", s); ok {
			p.MinTUR = m
		}
	}
	if w, ok := l.word(path, "tur_policy", f.TURPolicy, turPolicyWords); ok {
		p.TURPolicy = w
	}
	return len(l.errs) == before
}

// present returns the value of key under the mapping at path, trimmed; ok is false
// when the key is absent or (reported as an error) has no value.
func (l *loader) present(path, key string, v *string) (string, bool) {
	if v == nil {
		if l.doc.Has(path + "." + key) {
			l.errs = append(l.errs, l.doc.KeyErrorf(path+"."+key, "%q has no value", key))
		}
		return "", false
	}
	return strings.TrimSpace(*v), true
}

// word checks an optional key whose value is one of words.
func (l *loader) word(path, key string, v *string, words []string) (string, bool) {
	s, ok := l.present(path, key, v)
	if !ok {
		return "", false
	}
	for _, w := range words {
		if s == w {
			return s, true
		}
	}
	l.errs = append(l.errs, l.doc.Errorf(path+"."+key, "unknown %s %q: expected %s", key, s, orList(words)))
	return "", false
}

func orList(words []string) string {
	if len(words) == 2 {
		return words[0] + " or " + words[1]
	}
	return strings.Join(words[:len(words)-1], ", ") + " or " + words[len(words)-1]
}

// coverage reads a percentage such as "95.45 %" as a fraction, shifting the
// decimal point so that 95.45 % is exactly 0.9545.
func (l *loader) coverage(path, s string) (float64, bool) {
	num, isPct := strings.CutSuffix(s, "%")
	num = strings.TrimSpace(num)
	c, err := strconv.ParseFloat(num+"e-2", 64)
	if !isPct || err != nil || strings.ContainsAny(num, "eExXpP_") {
		l.errs = append(l.errs, l.doc.Errorf(path, "coverage %q is not a percentage: write the coverage probability of U, e.g. 95.45 %%", s))
		return 0, false
	}
	if !(c > 0 && c < 1) {
		l.errs = append(l.errs, l.doc.Errorf(path, "coverage %s must be above 0 %% and below 100 %%", s))
		return 0, false
	}
	return c, true
}

func (l *loader) minTUR(path, s string) (float64, bool) {
	num := strings.TrimSpace(strings.TrimSuffix(s, ":1"))
	m, err := strconv.ParseFloat(num, 64)
	if err != nil || math.IsInf(m, 0) || math.IsNaN(m) {
		l.errs = append(l.errs, l.doc.Errorf(path, "min_tur %q is not a number: write N for a minimum TUR of N:1, e.g. 4", s))
		return 0, false
	}
	if m <= 0 {
		l.errs = append(l.errs, l.doc.Errorf(path, "min_tur %s must be above 0 (N for a minimum TUR of N:1, e.g. 4)", s))
		return 0, false
	}
	return m, true
}

func (l *loader) guardFactor(path string, v *float64) (float64, bool) {
	p := path + ".guard_factor"
	if v == nil {
		if l.doc.Has(p) {
			l.errs = append(l.errs, l.doc.KeyErrorf(p, "\"guard_factor\" has no value"))
		}
		return 0, false
	}
	if !(*v > 0) || math.IsInf(*v, 0) {
		l.errs = append(l.errs, l.doc.Errorf(p, "guard_factor %v must be a number above 0 (r in w = r·U; use rule: simple for w = 0)", *v))
		return 0, false
	}
	return *v, true
}

// toleranced checks a toleranced limit entry (it has tolerance, and no expr) and
// fills lim.Tolerance and lim.Expr.
func (l *loader) toleranced(s *entrySrc, lim *Limit, f *limitForm, usesOK, unitOK bool) {
	tp := s.path("tolerance")
	if f.Tolerance == nil {
		l.errs = append(l.errs, l.doc.KeyErrorf(tp, "\"tolerance\" has no value: expected lower, upper or both, in the limit's unit"))
		return
	}
	if f.Uses != nil && len(*f.Uses) > 1 {
		l.errs = append(l.errs, l.doc.Errorf(s.path("uses"),
			"a toleranced limit judges exactly one result, but uses lists %d (%s): use expr for a limit over several results",
			len(*f.Uses), strings.Join(*f.Uses, ", ")))
		usesOK = false
	}
	t := &Tolerance{}
	okBounds := true
	bound := func(key string, v *string) *float64 {
		s, ok := l.present(tp, key, v)
		if !ok {
			if v == nil && l.doc.Has(tp+"."+key) {
				okBounds = false
			}
			return nil
		}
		x, err := strconv.ParseFloat(s, 64)
		if err != nil || math.IsInf(x, 0) || math.IsNaN(x) {
			unit := lim.Unit
			if unit == "" {
				unit = "a plain number"
			}
			l.errs = append(l.errs, l.doc.Errorf(tp+"."+key,
				"tolerance %s %q is not a number: write a plain number in the limit's unit (%s)", key, s, unit))
			okBounds = false
			return nil
		}
		return &x
	}
	t.Lower = bound("lower", f.Tolerance.Lower)
	t.Upper = bound("upper", f.Tolerance.Upper)
	switch {
	case !okBounds:
	case t.Lower == nil && t.Upper == nil:
		l.errs = append(l.errs, l.doc.Errorf(tp, "tolerance needs lower, upper or both (plain numbers in the limit's unit)"))
		okBounds = false
	case t.Lower != nil && t.Upper != nil && !(*t.Lower < *t.Upper):
		l.errs = append(l.errs, l.doc.Errorf(tp+".lower", "tolerance lower %s must be below upper %s",
			strconv.FormatFloat(*t.Lower, 'g', -1, 64), strconv.FormatFloat(*t.Upper, 'g', -1, 64)))
		okBounds = false
	}

	t.Rule, t.GuardFactor, t.Binary = l.policy.Rule, l.policy.GuardFactor, l.policy.Binary
	ruleOK := l.policyOK
	if w, ok := l.word(s.of("rule"), "rule", f.Rule, ruleWords); ok {
		t.Rule, ruleOK = w, true
	} else if f.Rule != nil {
		ruleOK = false
	}
	if r, ok := l.guardFactor(s.of("guard_factor"), f.GuardFactor); ok {
		t.GuardFactor = r
		if ruleOK && t.Rule == RuleSimple {
			l.errs = append(l.errs, l.doc.KeyErrorf(s.path("guard_factor"),
				"guard_factor applies to rule: guarded only, and this limit's rule is simple (w = 0)"))
		}
	}
	if w, ok := l.word(s.of("statements"), "statements", f.Statements, statementWords); ok {
		t.Binary = w == "binary"
	}
	if !okBounds || !usesOK || !unitOK || f.Uses == nil || len(*f.Uses) != 1 {
		return
	}
	lim.Tolerance = t
	lim.Expr = tolExpr(lim.Uses[0], t)
}

// tolExpr writes a tolerance as the equivalent expression, for records.
func tolExpr(name string, t *Tolerance) string {
	g := func(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }
	switch {
	case t.Lower != nil && t.Upper != nil:
		return fmt.Sprintf("within(%s, %s, %s)", name, g(*t.Lower), g(*t.Upper))
	case t.Lower != nil:
		return fmt.Sprintf("%s >= %s", name, g(*t.Lower))
	}
	return fmt.Sprintf("%s <= %s", name, g(*t.Upper))
}

// notForExpr reports decision-rule keys on an expression limit.
func (l *loader) notForExpr(s *entrySrc, f *limitForm) {
	for _, k := range []struct {
		key string
		set bool
	}{{"rule", f.Rule != nil}, {"guard_factor", f.GuardFactor != nil}, {"statements", f.Statements != nil}} {
		if k.set || l.doc.Has(s.path(k.key)) {
			l.errs = append(l.errs, l.doc.KeyErrorf(s.path(k.key),
				"%q applies only to a toleranced limit (one with tolerance): an expression limit has no decision rule", k.key))
		}
	}
}
