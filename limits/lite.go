package limits

import (
	"math"
	"sync"

	"github.com/expr-lang/expr/vm"
)

// JudgeLite judges one unit like Judge followed by Overall, but keeps only the
// verdicts: it builds no Outcome, Decision, statement or reason, and computes no
// probability of being outside the tolerance, so re-judging many stored units
// (WhatIf) costs a fraction of Judge.
//
// When verdicts is at least len(s.Limits) long, verdicts[i] is set to the verdict
// of s.Limits[i] (VerdictPass, VerdictReview or VerdictFail, as Overall would rank
// that limit's outcome); a shorter slice (nil) is left alone. The overall verdict
// is returned, and is always the one Overall gives for Judge's outcomes. JudgeLite
// does not change the Set or results and is safe for concurrent use.
func (s *Set) JudgeLite(results map[string]Value, verdicts []string) string {
	if s == nil || len(s.Limits) == 0 {
		return VerdictFail
	}
	pol := s.Policy()
	fill := len(verdicts) >= len(s.Limits)
	worst := VerdictPass
	for i, l := range s.Limits {
		v := l.verdictLite(results, pol)
		if fill {
			verdicts[i] = v
		}
		if rank(v) > rank(worst) {
			worst = v
		}
	}
	return worst
}

// verdictLite is judge and decide without the words: the same guards, in the same
// order, and the same zone and verdict functions.
func (l *Limit) verdictLite(results map[string]Value, pol Policy) string {
	var x float64
	var r Value
	for _, n := range l.Uses {
		v, ok := results[n]
		if !ok || !v.Valid || math.IsNaN(v.V) || math.IsInf(v.V, 0) {
			return VerdictFail
		}
		x = l.inUnit(v.V)
		if math.IsInf(x, 0) || math.IsNaN(x) {
			return VerdictFail
		}
		r = v
	}
	if l.Tolerance != nil && len(l.Uses) == 1 {
		return l.decideLite(x, r, pol)
	}
	return l.runLite(results)
}

func (l *Limit) decideLite(x float64, v Value, pol Policy) string {
	t := l.Tolerance
	un, why := l.uncertainty(v, pol.Coverage)
	if why != "" {
		return VerdictFail
	}
	var lo, hi, alo, ahi float64
	d := Decision{Rule: t.Rule, GuardFactor: t.GuardFactor, Binary: t.Binary}
	if t.Lower != nil {
		lo = *t.Lower
		d.Lower = &lo
	}
	if t.Upper != nil {
		hi = *t.Upper
		d.Upper = &hi
	}
	if un.evaluated {
		d.U = un.U
	} else {
		d.Rule = RuleSimple
	}
	if d.Rule == RuleGuarded {
		d.Guard = d.GuardFactor * d.U
	}
	if d.Lower != nil {
		alo = lo + d.Guard
		d.AcceptLower = &alo
	}
	if d.Upper != nil {
		ahi = hi - d.Guard
		d.AcceptUpper = &ahi
	}
	if !finite(d.Guard, d.AcceptLower, d.AcceptUpper) {
		return VerdictFail
	}
	d.Zone = zone(x, &d)
	if un.evaluated && d.Lower != nil && d.Upper != nil {
		d.TURLow = turLow(tur(lo, hi, un), pol.MinTUR)
	}
	return verdict(&d, pol)
}

// envs holds expression environments for reuse: JudgeLite runs an expression
// without allocating a map for it.
var envs = sync.Pool{New: func() any { return make(map[string]any, 4) }}

// runLite runs an expression limit on results that judge has checked.
func (l *Limit) runLite(results map[string]Value) string {
	if l.prog == nil {
		return VerdictFail
	}
	env := envs.Get().(map[string]any)
	clear(env)
	for _, n := range l.Uses {
		env[n] = l.inUnit(results[n].V)
	}
	m := vms.Get().(*vm.VM)
	out, err := m.Run(l.prog, env)
	vms.Put(m)
	envs.Put(env)
	if pass, ok := out.(bool); err == nil && ok && pass {
		return VerdictPass
	}
	return VerdictFail
}
