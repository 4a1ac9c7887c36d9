package limits

import (
	"fmt"
	"math"
	"strings"

	"trimline/instruments/units"
)

// Policy is a limit file's decision section: the file-wide decision rule for its
// toleranced limits and what a unit's overall verdict makes of each zone.
type Policy struct {
	Coverage        float64 // coverage probability of the expanded uncertainty U the engine supplies, as a fraction (0.9545)
	Rule            string  // default rule: RuleSimple or RuleGuarded
	GuardFactor     float64 // default r in w = r·U
	Binary          bool    // default statements: binary (pass/fail) or non-binary (four zones)
	ConditionalPass string  // "ship", "review" or "fail": a unit whose worst zone is conditional pass
	ConditionalFail string  // "fail" or "review": a unit with a conditional fail
	MinTUR          float64 // minimum test uncertainty ratio, N for N:1
	TURPolicy       string  // "warn" (record it) or "refuse" (the station must not run the file below MinTUR)
}

// Overall verdicts of a unit (Set.Overall). This package owns the verdict words:
// conditional_pass and conditional_fail name a verdict (or ShipConditional), and
// the engine's unit verdicts PASS, REVIEW and FAIL are these, as the run record
// spells them.
const (
	VerdictPass   = "pass"
	VerdictReview = "review" // a person decides (conditional zone under a review policy, or TUR too low under tur_policy: refuse)
	VerdictFail   = "fail"
)

// ShipConditional is the conditional_pass policy that ships a conditional pass:
// its verdict is VerdictPass.
const ShipConditional = "ship"

// tur_policy words.
const (
	TURWarn   = "warn"   // record a TUR below min_tur
	TURRefuse = "refuse" // the station must not run the file below min_tur; a pass with a low TUR is review
)

// defaultPolicy is the policy of a file without a decision section.
func defaultPolicy() Policy {
	return Policy{Coverage: 0.9545, Rule: RuleSimple, GuardFactor: 1, Binary: true,
		ConditionalPass: VerdictReview, ConditionalFail: VerdictFail, MinTUR: 4, TURPolicy: TURWarn}
}

// Policy returns the file's decision defaults and policies, defaults filled in.
func (s *Set) Policy() Policy {
	if s == nil || s.policy.Coverage == 0 {
		return defaultPolicy()
	}
	return s.policy
}

// Overall returns the unit's overall verdict from its outcomes following the set's
// policy: VerdictPass, VerdictReview or VerdictFail, the worst over the outcomes.
//
// An outcome without a Decision (an expression limit, or a result that was not a
// valid number) is pass or fail as its Pass says. A toleranced outcome with a
// binary statement is pass or fail as its zone is pass or not. With non-binary
// statements, zone pass is pass, conditional pass follows conditional_pass (ship →
// pass, review → review, fail → fail), conditional fail follows conditional_fail
// (fail or review) and fail is fail. A pass whose TUR is below min_tur becomes
// review when tur_policy is refuse. No outcomes at all is fail: a unit that
// nothing was judged on has not passed.
func (s *Set) Overall(outs []Outcome) string {
	if len(outs) == 0 {
		return VerdictFail
	}
	pol := s.Policy()
	worst := VerdictPass
	for i := range outs {
		v := outcomeVerdict(&outs[i], pol)
		if rank(v) > rank(worst) {
			worst = v
		}
	}
	return worst
}

func rank(v string) int {
	switch v {
	case VerdictPass:
		return 0
	case VerdictReview:
		return 1
	}
	return 2
}

func outcomeVerdict(o *Outcome, pol Policy) string {
	if o.Decision == nil {
		if o.Pass {
			return VerdictPass
		}
		return VerdictFail
	}
	return verdict(o.Decision, pol)
}

// verdict is the verdict on one toleranced result. Judge sets Outcome.Pass to
// verdict == VerdictPass, so Pass and Overall never disagree.
func verdict(d *Decision, pol Policy) string { return verdictOf(d.Zone, d.Binary, d.TURLow, pol) }

// verdictOf is the verdict on a result in zone under binary or non-binary
// statements, with a TUR below the minimum or not.
func verdictOf(zone string, binary, turLow bool, pol Policy) string {
	v := VerdictFail
	switch {
	case zone == ZonePass:
		v = VerdictPass
	case binary:
		v = VerdictFail
	case zone == ZoneConditionalPass:
		switch pol.ConditionalPass {
		case ShipConditional:
			v = VerdictPass
		case VerdictReview:
			v = VerdictReview
		}
	case zone == ZoneConditionalFail:
		if pol.ConditionalFail == VerdictReview {
			v = VerdictReview
		}
	}
	if v == VerdictPass && turLow && pol.TURPolicy == TURRefuse {
		v = VerdictReview
	}
	return v
}

// TolerancedLimit is one toleranced limit, for planning: which result it judges
// and its tolerance limits in SI units.
type TolerancedLimit struct {
	Limit  string   // the limit's name
	Result string   // the one result it judges
	Unit   string   // the limit's unit, for display
	Lower  *float64 // tolerance limits in SI units (V, fraction, count); nil = unbounded on that side
	Upper  *float64
}

// Toleranced reports the toleranced limits of the set, in file order, with their
// tolerance limits in SI units.
func (s *Set) Toleranced() []TolerancedLimit {
	if s == nil {
		return nil
	}
	var out []TolerancedLimit
	for _, l := range s.Limits {
		if l.Tolerance == nil || len(l.Uses) != 1 {
			continue
		}
		t := TolerancedLimit{Limit: l.Name, Result: l.Uses[0], Unit: l.Unit}
		if l.Tolerance.Lower != nil {
			v := l.toSI(*l.Tolerance.Lower)
			t.Lower = &v
		}
		if l.Tolerance.Upper != nil {
			v := l.toSI(*l.Tolerance.Upper)
			t.Upper = &v
		}
		out = append(out, t)
	}
	return out
}

// TURCheck is the test uncertainty ratio one toleranced limit can reach with a
// given measurement uncertainty (Set.PredictTUR).
type TURCheck struct {
	Limit, Result string
	TUR           float64 // (upper − lower)/(2·U95), ANSI/NCSL Z540.3-2006 §5.3; 0 when not defined
	Min           float64 // the set's min_tur
	Low           bool    // TUR cannot be shown to reach Min: below it, or no uncertainty given for a two-sided limit
	OneSided      bool    // the tolerance is bounded on one side only: TUR is not defined
	Note          string  // what was found, in words
}

// PredictTUR returns, for each toleranced limit in file order, the TUR reachable
// with the given uncertainty of its result, before any unit is run. unc maps result
// names to their uncertainty in SI units as in Value: expanded U at the set's
// coverage with coverage factor K (0: from the coverage and DOF), or standard Std,
// and effective degrees of freedom DOF (0 or +Inf: infinite); V and Valid are not
// used. A two-sided limit whose result has no usable uncertainty in unc is Low,
// since it cannot be shown to reach min_tur; a one-sided limit is never Low.
func (s *Set) PredictTUR(unc map[string]Value) []TURCheck {
	if s == nil {
		return nil
	}
	pol := s.Policy()
	var out []TURCheck
	for _, l := range s.Limits {
		t := l.Tolerance
		if t == nil || len(l.Uses) != 1 {
			continue
		}
		c := TURCheck{Limit: l.Name, Result: l.Uses[0], Min: pol.MinTUR}
		if t.Lower == nil || t.Upper == nil {
			c.OneSided = true
			c.Note = "one-sided tolerance: TUR is not defined"
			out = append(out, c)
			continue
		}
		v, ok := unc[c.Result]
		un, why := l.uncertainty(v, pol.Coverage)
		switch {
		case !ok:
			why = "no uncertainty given for " + c.Result
		case why == "" && !un.evaluated:
			why = "uncertainty of " + c.Result + " is zero (not evaluated)"
		}
		if why != "" {
			c.Low = true
			c.Note = why + ": TUR unknown"
			out = append(out, c)
			continue
		}
		c.TUR = tur(*t.Lower, *t.Upper, un)
		c.Low = turLow(c.TUR, pol.MinTUR)
		c.Note = strings.TrimSpace(fmt.Sprintf("TUR %s with U95 = %s %s", units.FormatTUR(c.TUR, c.Low), fmtSig(un.u*un.k95, 3), dispUnit(l.Unit)))
		if c.Low {
			c.Note += fmt.Sprintf(", below the minimum %s:1", fmtNum(pol.MinTUR))
		}
		out = append(out, c)
	}
	return out
}

// unc is one result's uncertainty in the limit's unit.
type unc struct {
	evaluated bool    // U or Std given
	u, U, k   float64 // standard, expanded at the set's coverage, coverage factor
	dof       float64 // math.Inf(1) = infinite (normal distribution)
	k95       float64 // coverage factor for 95 % with dof
	given     float64 // the dof as given (0 = unknown), for the statement's νeff
	interval  string  // Value.Interval: a Monte Carlo coverage interval's kind, or ""
}

// uncertainty reads v's uncertainty, converted to l's unit, for a set whose U is at
// coverage p. why is non-empty when the numbers are unusable.
//
// The standard uncertainty is U/K when both are given, else Std; U missing is
// K·Std (K from p and the dof when missing too), K missing is U/Std or the
// coverage factor for p with the dof: Student's t with DOF degrees of freedom, or
// the normal distribution when DOF is 0 (unknown), infinite or above 1e7.
func (l *Limit) uncertainty(v Value, p float64) (unc, string) {
	for _, x := range []struct {
		name string
		v    float64
	}{{"U", v.U}, {"u", v.Std}, {"k", v.K}} {
		if math.IsNaN(x.v) || math.IsInf(x.v, 0) || x.v < 0 {
			return unc{}, fmt.Sprintf("uncertainty %s = %v is not a finite number ≥ 0", x.name, x.v)
		}
	}
	if math.IsNaN(v.DOF) || v.DOF < 0 {
		return unc{}, fmt.Sprintf("degrees of freedom %v is not a number ≥ 0", v.DOF)
	}
	dof := v.DOF
	if dof == 0 || dof > 1e7 {
		dof = math.Inf(1)
	}
	var r unc
	r.dof, r.given, r.interval = dof, v.DOF, v.Interval
	if v.U == 0 && v.Std == 0 {
		return r, ""
	}
	r.evaluated = true
	U, u := l.inUnit(v.U), l.inUnit(v.Std)
	switch {
	case U > 0 && v.K > 0:
		r.U, r.k, r.u = U, v.K, U/v.K
	case u > 0 && U > 0:
		r.U, r.u, r.k = U, u, U/u
	case u > 0:
		r.k = v.K
		if r.k == 0 {
			r.k = coverageFactor(p, dof)
		}
		r.u, r.U = u, r.k*u
	default: // U only
		r.k = coverageFactor(p, dof)
		r.U, r.u = U, U/r.k
	}
	if !(r.u > 0) || math.IsInf(r.u, 0) || math.IsInf(r.U, 0) || !(r.U > 0) {
		return unc{}, fmt.Sprintf("uncertainty U = %g, u = %g is out of range in %s", v.U, v.Std, l.Unit)
	}
	r.k95 = coverageFactor(0.95, dof)
	if !finitePos(r.k) || !finitePos(r.k95) {
		return unc{}, fmt.Sprintf("no coverage factor for U = %g, u = %g, k = %g with %v degrees of freedom", v.U, v.Std, v.K, v.DOF)
	}
	return r, ""
}

// tur is the test uncertainty ratio (upper − lower)/(2·U95), ANSI/NCSL
// Z540.3-2006 §5.3, with U95 the uncertainty re-expanded to 95 % coverage.
func tur(lower, upper float64, un unc) float64 {
	t := (upper - lower) / (2 * un.u * un.k95)
	if math.IsInf(t, 1) {
		return math.MaxFloat64
	}
	return t
}

// turLow reports a TUR below min, allowing for rounding in the last digits (a TUR
// of exactly 4 that comes out 3.9999999999999996 is not low).
func turLow(t, min float64) bool {
	return t > 0 && t < min*(1-1e-12)
}

func finitePos(v float64) bool { return v > 0 && !math.IsInf(v, 0) }
