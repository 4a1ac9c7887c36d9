package limits

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
	"sync"

	"github.com/expr-lang/expr/file"
	"github.com/expr-lang/expr/vm"
)

// Judge judges one unit's results against every limit of the Set and returns one
// Outcome per limit, in file order. results maps result names to values in SI base
// units (volts; ratios as plain fractions; counts).
//
// For a unit with several channels (a Set loaded with a Catalog that lists
// per-channel results), a per-channel result is found under ChannelKey(name, ch).
// A limit that uses a per-channel result gives one Outcome per channel, in
// channel order, with Outcome.Channel set; inside it each per-channel result is
// that channel's value under its plain name. A limit with a channel key gives the
// one Outcome of that channel.
//
// An expression limit passes only when its expression gives true. Before the
// expression runs, every result the limit uses must be present, Valid, and a finite
// number (also once scaled to the limit's unit); otherwise the limit fails with the
// reason "result NAME is not a valid number: WHY" and the expression is not run, so
// no form of expression can pass a NaN. Such a failure has no Decision; for a
// toleranced limit its Tolerance says what the limit file wrote.
//
// A toleranced limit's result passes the same guard, and then its uncertainty
// (Value.U, K, Std, DOF, converted to the limit's unit) must be finite numbers ≥ 0,
// else the limit fails without a Decision. Its Decision gives the guard band
// w = r·U (0 for the simple rule), the acceptance limits AL = TL ∓ w, the zone of
// ILAC-G8:09/2019 §4.2.3, the probability that the true value is outside the
// tolerance, the TUR and a statement in words. Pass is true for zone pass, and with
// non-binary statements also for conditional pass under conditional_pass: ship; a
// TUR below min_tur under tur_policy: refuse turns a pass into review (Pass false).
// A result without an uncertainty (U and Std zero) is judged by simple acceptance
// against the tolerance and its statement says so. See Set.Overall. Outcome.Values holds each usable result in the
// limit's unit (never a NaN or an infinity, so the Outcome always encodes as JSON);
// a failing expression's Reason quotes it with those values, and a run-time error
// (say from a registered function) fails the limit with the error as the reason.
//
// Judge does not change the Set or results and is safe for concurrent use.
func (s *Set) Judge(results map[string]Value) []Outcome {
	if s == nil {
		return nil
	}
	pol := s.Policy()
	outs := make([]Outcome, 0, len(s.Limits))
	for _, l := range s.Limits {
		chans := s.channelsOf(l)
		if chans == nil {
			outs = append(outs, l.judge(results, pol))
			continue
		}
		for _, ch := range chans {
			o := l.judge(s.view(l, results, ch), pol)
			o.Channel = ch
			outs = append(outs, o)
		}
	}
	return outs
}

// Passed reports whether every outcome passed. It is false for no outcomes: a unit
// that nothing was judged on has not passed.
func Passed(outs []Outcome) bool {
	for _, o := range outs {
		if !o.Pass {
			return false
		}
	}
	return len(outs) > 0
}

var vms = sync.Pool{New: func() any { return new(vm.VM) }}

func (l *Limit) judge(results map[string]Value, pol Policy) Outcome {
	o := Outcome{Name: l.Name, Description: l.Description, Expr: l.Expr, Unit: l.Unit,
		Uses: append([]string(nil), l.Uses...), Values: make(map[string]float64, len(l.Uses))}
	var bad []string
	for _, n := range l.Uses {
		v, why := l.value(results, n)
		if why != "" {
			bad = append(bad, fmt.Sprintf("result %s is not a valid number: %s", n, why))
			continue
		}
		o.Values[n] = v
	}
	if len(bad) > 0 {
		o.Reason = strings.Join(bad, "; ")
		o.Tolerance = l.unjudged()
		return o
	}
	if l.toleranced() {
		l.decide(&o, o.Values[l.Uses[0]], results[l.Uses[0]], pol)
		if o.Decision == nil {
			o.Tolerance = l.unjudged()
		}
		return o
	}
	if l.prog == nil { // a Limit not made by Load
		o.Reason = "limit was not compiled by Load"
		return o
	}
	out, err := l.run(results)
	if err != nil {
		msg := err.Error()
		var fe *file.Error
		if errors.As(err, &fe) {
			msg = fe.Message
		}
		o.Reason = fmt.Sprintf("%s could not be evaluated: %s", oneLine(l.Expr), msg)
		return o
	}
	pass, ok := out.(bool)
	if !ok {
		o.Reason = fmt.Sprintf("%s gave %v, not true or false", oneLine(l.Expr), out)
		return o
	}
	if pass {
		o.Pass = true
		return o
	}
	parts := make([]string, len(l.Uses))
	for i, n := range l.Uses {
		parts[i] = n + " = " + strconv.FormatFloat(o.Values[n], 'g', 10, 64)
		if l.Unit != "" {
			parts[i] += " " + l.Unit
		}
	}
	o.Reason = fmt.Sprintf("%s is false with %s", oneLine(l.Expr), strings.Join(parts, ", "))
	return o
}

// unjudged is l's tolerance for an Outcome without a Decision, nil for an
// expression limit.
func (l *Limit) unjudged() *Unjudged {
	if !l.toleranced() {
		return nil
	}
	t := l.Tolerance
	cp := func(p *float64) *float64 { // the Outcome shares nothing with the Set
		if p == nil {
			return nil
		}
		v := *p
		return &v
	}
	return &Unjudged{Lower: cp(t.Lower), Upper: cp(t.Upper), Rule: t.Rule, GuardFactor: t.GuardFactor, Binary: t.Binary}
}

// toleranced reports whether l is judged under the decision rule (a tolerance on
// one result) rather than by its expression.
func (l *Limit) toleranced() bool { return l.Tolerance != nil && len(l.Uses) == 1 }

// value returns result n in the limit's unit, or why it cannot be judged: it is
// missing, flagged invalid, not a finite number, or not finite once scaled.
func (l *Limit) value(results map[string]Value, n string) (float64, string) {
	r, ok := results[n]
	switch {
	case !ok:
		return 0, "no such result was produced"
	case !r.Valid && r.Why != "":
		return 0, r.Why
	case !r.Valid:
		return 0, "flagged invalid"
	case math.IsNaN(r.V):
		return 0, "it is NaN"
	case math.IsInf(r.V, 0):
		return 0, fmt.Sprintf("it is %v", r.V)
	}
	v := l.inUnit(r.V)
	if math.IsInf(v, 0) || math.IsNaN(v) {
		return 0, fmt.Sprintf("%g is out of range in %s", r.V, l.Unit)
	}
	return v, ""
}

// envs holds expression environments for reuse, so that running an expression
// allocates no map.
var envs = sync.Pool{New: func() any { return make(map[string]any, 4) }}

// run runs l's compiled expression on results that value has accepted, each in
// the limit's unit.
func (l *Limit) run(results map[string]Value) (any, error) {
	env := envs.Get().(map[string]any)
	clear(env)
	for _, n := range l.Uses {
		env[n] = l.inUnit(results[n].V)
	}
	m := vms.Get().(*vm.VM)
	out, err := m.Run(l.prog, env)
	vms.Put(m)
	clear(env)
	envs.Put(env)
	return out, err
}

// inUnit converts v (SI) to the limit's unit. When the unit is a power of ten of
// the SI unit (uV, mV, ppm, %) the shift is done on v's shortest decimal form, so
// 1.23e-5 V is exactly 12.3 uV and 60e-6 V is exactly 60 uV (plain division by
// 1e-6, itself inexact, gives 12.299999999999999 and 60.00000000000001): a value
// written at a limit stays at it, and records show the digits that were measured.
func (l *Limit) inUnit(v float64) float64 {
	if !l.pow10 {
		return v / l.scale
	}
	if l.exp10 == 0 || v == 0 || math.IsNaN(v) || math.IsInf(v, 0) {
		return v
	}
	var buf [40]byte
	b := strconv.AppendFloat(buf[:0], v, 'e', -1, 64) // "-1.23e-05"
	i := len(b) - 1
	for b[i] != 'e' {
		i--
	}
	exp, err := strconv.Atoi(string(b[i+1:]))
	if err != nil {
		return v / l.scale
	}
	b = strconv.AppendInt(b[:i+1], int64(exp-l.exp10), 10)
	out, err := strconv.ParseFloat(string(b), 64)
	if err != nil && !math.IsInf(out, 0) {
		return v / l.scale
	}
	return out // ±Inf when the shift overflows, which Judge reports
}

func oneLine(s string) string { return strings.Join(strings.Fields(s), " ") }
