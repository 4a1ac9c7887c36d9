package limits

import (
	"fmt"
	"math"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"

	"gonum.org/v1/gonum/stat/distuv"

	"trimline/instruments/units"
)

// decide judges a toleranced limit's one result x (already checked to be a finite
// number, in the limit's unit) with its uncertainty, filling o's Pass, Reason and
// Decision.
func (l *Limit) decide(o *Outcome, x float64, v Value, pol Policy) {
	r := l.rule(x, v, pol)
	switch r.why {
	case "":
	case whyTooLarge:
		o.Reason = fmt.Sprintf("result %s has no usable uncertainty: U = %g %s is too large to judge with", l.Uses[0], r.un.U, l.Unit)
		return
	default:
		o.Reason = fmt.Sprintf("result %s has no usable uncertainty: %s", l.Uses[0], r.why)
		return
	}
	t, un := l.Tolerance, r.un
	d := &Decision{Result: l.Uses[0], Rule: r.rule, GuardFactor: t.GuardFactor, Guard: r.guard, Value: x,
		Binary: t.Binary, Zone: r.zone, TUR: r.tur, TURLow: r.turLow}
	if t.Lower != nil {
		d.Lower, d.AcceptLower = ptr(*t.Lower), ptr(r.acceptLower)
	}
	if t.Upper != nil {
		d.Upper, d.AcceptUpper = ptr(*t.Upper), ptr(r.acceptUpper)
	}
	if un.evaluated {
		d.Std, d.U, d.K, d.DOF = un.u, un.U, un.k, DegreesOfFreedom(un.dof)
	} else {
		d.GuardFactor = 0 // nothing to guard with
	}
	d.POutside = pOutside(x, d, un)
	o.Pass = r.verdict == VerdictPass
	o.Decision = d
	d.Statement = l.statement(d, un, pol, r.verdict)
	if !o.Pass {
		o.Reason = l.reason(d, pol, r.verdict)
	}
}

// ruling is the decision rule applied to one toleranced result: the numbers a
// Decision records, without the words and the probability.
type ruling struct {
	un                       unc
	why                      string  // non-empty: the uncertainty is unusable and the limit fails
	rule                     string  // the rule applied: the limit's, or RuleSimple without an uncertainty
	guard                    float64 // w
	acceptLower, acceptUpper float64 // acceptance limits; ∓Inf where the tolerance is open
	zone                     string
	tur                      float64 // 0 when one-sided or U unknown
	turLow                   bool
	verdict                  string
}

// whyTooLarge is ruling.why when the guard band or an acceptance limit is not a
// finite number.
const whyTooLarge = "U too large"

// rule applies the decision rule to a toleranced limit's result x (in the limit's
// unit) with v's uncertainty: guard band, acceptance limits, zone of ILAC-G8:09/2019
// §4.2.3, TUR and the verdict. Judge (through decide) and Verdicts both judge with
// it; it allocates nothing.
func (l *Limit) rule(x float64, v Value, pol Policy) ruling {
	t := l.Tolerance
	var r ruling
	if r.un, r.why = l.uncertainty(v, pol.Coverage); r.why != "" {
		r.verdict = VerdictFail
		return r
	}
	lo, hi := math.Inf(-1), math.Inf(1)
	if t.Lower != nil {
		lo = *t.Lower
	}
	if t.Upper != nil {
		hi = *t.Upper
	}
	r.rule = t.Rule
	if !r.un.evaluated {
		r.rule = RuleSimple
	}
	if r.rule == RuleGuarded {
		r.guard = t.GuardFactor * r.un.U
	}
	r.acceptLower, r.acceptUpper = lo+r.guard, hi-r.guard
	if math.IsInf(r.guard, 0) || math.IsNaN(r.guard) ||
		t.Lower != nil && !isFinite(r.acceptLower) || t.Upper != nil && !isFinite(r.acceptUpper) {
		r.why, r.verdict = whyTooLarge, VerdictFail
		return r
	}
	r.zone = zone(x, lo, hi, r.acceptLower, r.acceptUpper, r.guard)
	if r.un.evaluated && t.Lower != nil && t.Upper != nil {
		r.tur = tur(lo, hi, r.un)
		r.turLow = turLow(r.tur, pol.MinTUR)
	}
	r.verdict = verdictOf(r.zone, t.Binary, r.turLow, pol)
	return r
}

func isFinite(v float64) bool { return !math.IsInf(v, 0) && !math.IsNaN(v) }

func ptr(v float64) *float64 { return &v }

// zone places x (a finite number) in the zones of ILAC-G8:09/2019 §4.2.3: pass
// inside the acceptance interval alo … ahi (its limits included), conditional pass
// inside the tolerance lo … hi (its limits included) but outside the acceptance
// interval, conditional fail outside the tolerance by at most w, fail beyond. A
// side without a limit is −Inf or +Inf.
func zone(x, lo, hi, alo, ahi, w float64) string {
	inAccept := x >= alo && x <= ahi
	inTol := x >= lo && x <= hi
	switch {
	case inAccept && inTol: // inTol matters only when the acceptance interval is empty
		return ZonePass
	case inTol:
		return ZoneConditionalPass
	case x >= lo-w && x <= hi+w:
		return ZoneConditionalFail
	}
	return ZoneFail
}

// pOutside is the probability that the true value lies outside the tolerance, for
// a measured x with standard uncertainty u: the normal distribution, or Student's
// t scaled by u with the dof when it is finite. Without an uncertainty it is 0
// inside the tolerance and 1 outside.
func pOutside(x float64, d *Decision, un unc) float64 {
	if !un.evaluated {
		if (d.Lower == nil || x >= *d.Lower) && (d.Upper == nil || x <= *d.Upper) {
			return 0
		}
		return 1
	}
	var p float64
	if math.IsInf(un.dof, 1) {
		s := un.u * math.Sqrt2
		if d.Lower != nil {
			p += 0.5 * math.Erfc((x-*d.Lower)/s)
		}
		if d.Upper != nil {
			p += 0.5 * math.Erfc((*d.Upper-x)/s)
		}
	} else {
		t := distuv.StudentsT{Mu: x, Sigma: un.u, Nu: un.dof}
		if d.Lower != nil {
			p += t.CDF(*d.Lower)
		}
		if d.Upper != nil {
			p += t.Survival(*d.Upper)
		}
	}
	return math.Max(0, math.Min(1, p))
}

// coverageFactor is the two-sided coverage factor for coverage probability p:
// the (1+p)/2 quantile of Student's t with dof degrees of freedom, or of the normal
// distribution when dof is infinite.
//
// The t quantile costs some microseconds, so factors are remembered, up to
// kCacheMax distinct (p, dof) pairs (a station has a few; fractional
// Welch–Satterthwaite dofs could have many, and are then computed each time).
func coverageFactor(p, dof float64) float64 {
	key := [2]float64{p, dof}
	if k, ok := kCache.m.Load(key); ok {
		return k.(float64)
	}
	q := (1 + p) / 2
	var k float64
	if math.IsInf(dof, 1) {
		k = distuv.UnitNormal.Quantile(q)
	} else {
		k = distuv.StudentsT{Mu: 0, Sigma: 1, Nu: dof}.Quantile(q)
	}
	if kCache.n.Load() < kCacheMax {
		if _, loaded := kCache.m.LoadOrStore(key, k); !loaded {
			kCache.n.Add(1)
		}
	}
	return k
}

const kCacheMax = 4096

var kCache struct {
	m sync.Map // [2]float64{p, dof} → coverage factor
	n atomic.Int32
}

// toSI converts v in the limit's unit to SI, the inverse of inUnit (a decimal shift
// for powers of ten, so 50 uV is exactly 5e-05 V).
func (l *Limit) toSI(v float64) float64 {
	if !l.pow10 {
		return v * l.scale
	}
	if l.exp10 == 0 || v == 0 {
		return v
	}
	s := strconv.FormatFloat(v, 'e', -1, 64)
	i := strings.IndexByte(s, 'e')
	exp, err := strconv.Atoi(s[i+1:])
	if err != nil {
		return v * l.scale
	}
	out, err := strconv.ParseFloat(s[:i+1]+strconv.Itoa(exp+l.exp10), 64)
	if err != nil {
		return v * l.scale
	}
	return out
}

// section names the ILAC-G8:09/2019 clause of the rule applied.
func section(d *Decision) string {
	switch {
	case d.Rule == RuleSimple:
		return "§4.2.1"
	case d.Binary:
		return "§4.2.2"
	}
	return "§4.2.3"
}

// statement says, in words, the decision rule, where the result lies and the
// verdict, the probability of being outside the tolerance, and the TUR. Every
// number in it is written by the Decision's own text methods (ValueText, UText,
// AcceptText, TURText, PFAText), which the certificate's table uses too: one
// quantity, one number.
func (l *Limit) statement(d *Decision, un unc, pol Policy, v string) string {
	u := dispUnit(l.Unit)
	with := func(s string) string { return strings.TrimSpace(s + " " + u) }
	var b strings.Builder
	switch {
	case !un.evaluated:
		b.WriteString("Uncertainty not evaluated: simple acceptance, w = 0 (ILAC-G8:09/2019 §4.2.1)")
		if l.Tolerance.Rule == RuleGuarded {
			b.WriteString(" instead of the guarded rule")
		}
		fmt.Fprintf(&b, ": measured %s", with(l.valueText(d)))
	case d.Rule == RuleSimple:
		fmt.Fprintf(&b, "Simple acceptance, w = 0 (ILAC-G8:09/2019 §4.2.1): measured %s with U = %s (k = %.2f%s)",
			with(l.valueText(d)), with(d.UText()), d.K, coverageText(un))
	default:
		fmt.Fprintf(&b, "Guarded acceptance, w = %s·U = %s (ILAC-G8:09/2019 %s): measured %s with U = %s (k = %.2f%s)",
			fmtNum(d.GuardFactor), with(d.GuardText()), section(d), with(l.valueText(d)), with(d.UText()), d.K, coverageText(un))
	}
	b.WriteString(" lies ")
	b.WriteString(l.where(d))
	b.WriteString(": ")
	b.WriteString(d.Zone)
	switch {
	case d.Binary && d.Zone != ZonePass && d.Zone != ZoneFail:
		b.WriteString(", so fail (binary statement)")
	case !d.Binary && d.Zone == ZoneConditionalPass:
		fmt.Fprintf(&b, ", so %s (conditional_pass: %s)", v, pol.ConditionalPass)
	case !d.Binary && d.Zone == ZoneConditionalFail:
		fmt.Fprintf(&b, ", so %s (conditional_fail: %s)", v, pol.ConditionalFail)
	case d.Zone == ZonePass && v == VerdictReview:
		b.WriteString(", but review: the TUR is below the minimum (tur_policy: refuse)")
	}
	b.WriteString(".")
	if un.evaluated {
		fmt.Fprintf(&b, " Probability the true value is outside the tolerance: %s.", d.PFAText())
	}
	switch {
	case d.Lower == nil || d.Upper == nil:
		b.WriteString(" TUR not defined for a one-sided tolerance.")
	case !un.evaluated:
		b.WriteString(" TUR not known.")
	default:
		fmt.Fprintf(&b, " TUR %s (ANSI/NCSL Z540.3-2006 §5.3, U95 = %s)", d.TURText(), with(fmtSig(un.u*un.k95, 3)))
		if d.TURLow {
			fmt.Fprintf(&b, ", below the minimum %s:1", fmtNum(pol.MinTUR))
			if pol.TURPolicy == TURRefuse {
				b.WriteString(" (tur_policy: refuse)")
			}
		}
		b.WriteString(".")
	}
	return b.String()
}

// coverageText says where k comes from after "k = 2.00": for a Monte Carlo U
// the kind of coverage interval (JCGM 101:2008 §7.7 or §7.8; the GUM's νeff,
// which the record keeps for reference, did not give k); else the effective
// degrees of freedom as given, written as the certificate's table writes them
// (units.FormatDOF: "νeff ≥ 1000" for 1.5e6, "νeff = ∞" for infinite), or
// nothing when unknown. The judge takes a νeff above 1e7 as infinite for k,
// but the statement writes the νeff the result has, as the table does.
func coverageText(un unc) string {
	switch un.interval {
	case "":
	case "shortest":
		return ", shortest Monte Carlo coverage interval, JCGM 101:2008 §7.8"
	case "symmetric":
		return ", probabilistically symmetric Monte Carlo coverage interval, JCGM 101:2008 §7.7"
	default:
		return ", Monte Carlo coverage interval (" + un.interval + "), JCGM 101:2008"
	}
	if s := units.FormatDOF(un.given); s != "" {
		return ", " + s
	}
	return ""
}

// where says where the decision's value lies relative to the acceptance
// interval and the tolerance.
func (l *Limit) where(d *Decision) string {
	u := dispUnit(l.Unit)
	with := func(s string) string { return strings.TrimSpace(s + " " + u) }
	tolNum := func(v float64, _ bool) string { return fmtNum(v) }
	interval := func(lo, hi *float64, what string, num func(float64, bool) string) string {
		switch {
		case lo != nil && hi != nil:
			return fmt.Sprintf("the %s interval %s … %s", what, num(*lo, false), with(num(*hi, true)))
		case lo != nil:
			return fmt.Sprintf("the lower %s limit %s", what, with(num(*lo, false)))
		}
		return fmt.Sprintf("the upper %s limit %s", what, with(num(*hi, true)))
	}
	side := func(lo, hi *float64) string {
		if lo != nil && hi != nil {
			return "within"
		}
		if lo != nil {
			return "at or above"
		}
		return "at or below"
	}
	tol := interval(d.Lower, d.Upper, "tolerance", tolNum)
	acc := interval(d.AcceptLower, d.AcceptUpper, "acceptance", func(_ float64, upper bool) string { return d.AcceptText(upper) })
	empty := d.AcceptLower != nil && d.AcceptUpper != nil && *d.AcceptLower > *d.AcceptUpper
	switch d.Zone {
	case ZonePass:
		if d.Guard == 0 {
			return side(d.Lower, d.Upper) + " " + tol
		}
		return side(d.AcceptLower, d.AcceptUpper) + " " + acc
	case ZoneConditionalPass:
		if empty {
			return fmt.Sprintf("%s %s, but the acceptance interval is empty (2w = %s exceeds the tolerance width)",
				side(d.Lower, d.Upper), tol, with(d.guardText(2*d.Guard)))
		}
		return fmt.Sprintf("%s %s but outside %s", side(d.Lower, d.Upper), tol, acc)
	case ZoneConditionalFail:
		return fmt.Sprintf("outside %s by no more than w = %s", tol, with(d.GuardText()))
	}
	if d.Guard == 0 {
		return "outside " + tol
	}
	return fmt.Sprintf("outside %s by more than w = %s", tol, with(d.GuardText()))
}

// reason says why a toleranced limit did not pass.
func (l *Limit) reason(d *Decision, pol Policy, v string) string {
	q := strings.TrimSpace(l.valueText(d) + " " + dispUnit(l.Unit))
	r := fmt.Sprintf("%s = %s lies %s", d.Result, q, l.where(d))
	switch {
	case d.Zone == ZoneFail:
		r += ": fail"
	case d.Binary:
		r += fmt.Sprintf(": %s, so fail (binary statement: only the acceptance interval passes)", d.Zone)
	case d.Zone == ZoneConditionalPass:
		r += fmt.Sprintf(": conditional pass, so %s (conditional_pass: %s)", v, pol.ConditionalPass)
	case d.Zone == ZoneConditionalFail:
		r += fmt.Sprintf(": conditional fail, so %s (conditional_fail: %s)", v, pol.ConditionalFail)
	default: // a pass held back by a low TUR
		r = fmt.Sprintf("%s = %s passes, but the TUR %s is below the minimum %s:1 and tur_policy is refuse: review",
			d.Result, q, d.TURText(), fmtNum(pol.MinTUR))
	}
	return r
}

// The numbers of a decision as every document writes them. The statement and
// the reason above, the certificate's results table and the terminal all call
// these, so that a quantity has one number wherever it appears. The rule is
// JCGM 100:2008 §7.2.6: U with two significant digits, rounded up (a stated U,
// metrology revision 1 on, already is), the value to the same decimal place.

// ValueText is the measured value to the decimal place of its stated U
// (units.FormatValue), with the digits it takes to show on which side of each
// tolerance and acceptance limit it lies; without an uncertainty, up to six
// significant digits.
func (d *Decision) ValueText() string {
	var bounds []float64
	for _, p := range []*float64{d.Lower, d.Upper, d.AcceptLower, d.AcceptUpper} {
		if p != nil {
			bounds = append(bounds, *p)
		}
	}
	return units.FormatValue(d.Value, d.U, bounds...)
}

// valueText is d.ValueText, but a whole number of codes in a limit on codes
// (the certificate writes codes as whole numbers too).
func (l *Limit) valueText(d *Decision) string {
	switch strings.TrimSpace(l.Unit) {
	case "code", "codes", "LSB":
		if d.Value == math.Round(d.Value) {
			return fmtNum(d.Value)
		}
	}
	return d.ValueText()
}

// UText is the expanded uncertainty as stated: two significant digits, rounded
// up (units.FormatU); "" when not evaluated.
func (d *Decision) UText() string {
	if !(d.U > 0) {
		return ""
	}
	return units.FormatU(d.U)
}

// GuardText is the guard band w = r·U: computed from a stated U it is a short
// decimal and is written in full.
func (d *Decision) GuardText() string { return d.guardText(d.Guard) }

func (d *Decision) guardText(w float64) string {
	if units.IsStated(d.U) {
		// At U's decimal place, or finer where r·U needs it: w = 1·U is
		// "0.20" as U is, not "0.2"; w = 0.5·U of U = 0.15 is "0.075".
		_, dec := units.RoundU(d.U)
		return units.FormatAt(w, max(dec, decimals(w), 0))
	}
	return fmtSig(w, 3)
}

// decimals is the number of decimals of v written with up to nine significant
// digits: decimals(0.075) = 3, decimals(800) = 0.
func decimals(v float64) int {
	s := fmtSig(v, 9)
	if i := strings.IndexByte(s, '.'); i >= 0 && !strings.ContainsAny(s, "eE") {
		return len(s) - i - 1
	}
	return 0
}

// AcceptText is the upper (or lower) acceptance limit AL = TL ∓ w
// (units.FormatLimit): in full when computed from a stated U, else rounded
// inward one decimal finer than U. "" when that side is open.
func (d *Decision) AcceptText(upper bool) string {
	al, tl := d.AcceptLower, d.Lower
	if upper {
		al, tl = d.AcceptUpper, d.Upper
	}
	switch {
	case al == nil:
		return ""
	case !(d.U > 0) || tl == nil:
		return fmtNum(*al)
	}
	return units.FormatLimit(*al, *tl, math.Abs(*tl-*al), d.U, upper)
}

// TURText is the test uncertainty ratio "3.88:1" (units.FormatTUR: three
// significant digits, a TUR below the minimum rounded down), or "—" when it
// is not defined.
func (d *Decision) TURText() string { return units.FormatTUR(d.TUR, d.TURLow) }

// PFAText is the probability that the true value lies outside the tolerance
// (units.FormatProbability: two significant digits, "< 0.0001 %" below).
//
// It is one format wherever a U was evaluated: a tail that rounds to 1 is
// "> 99.9999 %" as everywhere. Only a value judged without an uncertainty (a
// probability of 0 or 1 by construction) is "0 %" or "100 %".
func (d *Decision) PFAText() string {
	if !(d.U > 0) && (d.POutside == 0 || d.POutside == 1) {
		return units.FormatSig(d.POutside*100, 3) + " %"
	}
	return units.FormatProbability(d.POutside)
}

// dispUnit writes the micro prefix as µ for statements ("uV" → "µV").
func dispUnit(u string) string { return units.Display(u) }

// fmtNum writes v with up to 6 significant digits, no exponent for ordinary sizes,
// and a real minus sign.
func fmtNum(v float64) string { return units.FormatSig(v, 6) }

// fmtSig writes v with up to sig significant digits (trailing zeros dropped).
func fmtSig(v float64, sig int) string { return units.FormatSig(v, sig) }
