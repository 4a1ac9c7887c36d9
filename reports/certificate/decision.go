package certificate

import (
	"fmt"
	"slices"
	"strings"

	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer"
)

// ruleKey groups toleranced limits by the rule they are judged by.
type ruleKey struct {
	rule   string
	r      float64
	binary bool
}

// decisionRule states the decision rules in force and the coverage probability of
// the uncertainties (ISO/IEC 17025:2017 §7.8.6.1).
func (d *doc) decisionRule() {
	r := d.rec
	if len(r.Outcomes) == 0 {
		return
	}
	var keys []ruleKey
	names := map[ruleKey][]string{}
	var exprs []string
	// A limit of several channels is named once, and the channels it was
	// judged on counted.
	chans := map[ruleKey][]string{}
	var exprChans []string
	addChan := func(cs []string, c string) []string {
		if c == "" || slices.Contains(cs, c) {
			return cs
		}
		return append(cs, c)
	}
	anyCond, statements, anyU := false, false, false
	methods := map[string]bool{}
	for _, o := range d.outcomesByStage() {
		dd := o.Decision
		var k ruleKey
		switch {
		case dd != nil:
			k = ruleKey{dd.Rule, dd.GuardFactor, dd.Binary}
		case o.Tolerance != nil: // a toleranced limit not measured: the rule it is under
			k = ruleKey{o.Tolerance.Rule, o.Tolerance.GuardFactor, o.Tolerance.Binary}
		default:
			if !slices.Contains(exprs, o.Name) {
				exprs = append(exprs, o.Name)
			}
			exprChans = addChan(exprChans, outcomeChannel(o))
			continue
		}
		if k.rule != "guarded" {
			k.r = 0
		}
		if _, ok := names[k]; !ok {
			keys = append(keys, k)
		}
		if !slices.Contains(names[k], o.Name) {
			names[k] = append(names[k], o.Name)
		}
		chans[k] = addChan(chans[k], outcomeChannel(o))
		if dd == nil {
			continue
		}
		anyCond = anyCond || conditional(dd)
		statements = statements || dd.Statement != ""
	}
	for _, res := range r.Results {
		if hasU(res.Unc.Expanded) {
			anyU = true
			if res.Unc.Method != "" {
				methods[res.Unc.Method] = true
			}
		}
	}
	list := func(ns, cs []string) string {
		on := ""
		if len(cs) > 1 {
			on = fmt.Sprintf(" on %d channels", len(cs))
		}
		switch {
		case len(ns) > 4:
			return fmt.Sprintf("%d limits", len(ns)) + on
		case len(ns) == 1:
			return "limit " + ns[0] + on
		}
		return "limits " + joinAnd(ns) + on
	}
	var fs []para
	for _, k := range keys {
		var text string
		switch {
		case k.rule == "guarded" && k.binary:
			text = fmt.Sprintf("Guarded acceptance, binary statement (ILAC-G8:09/2019 §4.2.2), guard band w = r·U, r = %s: "+
				"pass inside the acceptance interval (the tolerance narrowed by w), fail outside it.", fmtLimitNum(k.r))
		case k.rule == "guarded":
			text = fmt.Sprintf("Guarded acceptance, non-binary statement (ILAC-G8:09/2019 §4.2.3), guard band w = r·U, r = %s: "+
				"pass inside the acceptance interval (the tolerance narrowed by w); conditional pass between it and the tolerance; "+
				"conditional fail outside the tolerance by less than w; fail beyond.", fmtLimitNum(k.r))
		case k.rule == "simple":
			text = "Simple acceptance (ILAC-G8:09/2019 §4.2.1), w = 0: pass inside the tolerance, fail outside it; " +
				"close to a limit the false-accept probability may reach 50 %."
		default:
			text = fmt.Sprintf("Rule “%s” as the limit file states it (r = %s).", k.rule, fmtLimitNum(k.r))
		}
		fs = append(fs, para{"Rule in force", text + " Applies to " + list(names[k], chans[k]) + "."})
	}
	if len(exprs) > 0 {
		text := capital(list(exprs, exprChans)) + ": written as expressions, judged on the measured value alone"
		if len(exprs) == 1 {
			text = capital(list(exprs, exprChans)) + ": written as an expression, judged on the measured value alone"
		}
		if len(keys) == 0 {
			text += ", without regard to its uncertainty."
		} else {
			text += " (w = 0)."
		}
		fs = append(fs, para{"Expressions", text})
	}
	switch {
	case !anyU:
		fs = append(fs, para{"Uncertainty", "U not evaluated: the record holds no measurement uncertainty."})
	default:
		text := "U = k·u "
		if r.Coverage > 0 && r.Coverage < 1 {
			text += "for a coverage probability of " + fmtCoverage(r.Coverage) + ", "
		} else {
			text += "for a coverage probability the record does not state, "
		}
		text += "k from the effective degrees of freedom νeff (Welch–Satterthwaite)."
		switch mc := mcCoverage(r); {
		case mc != "":
			// Monte Carlo coverage intervals: GUM and MC each say how U comes about.
			text = "Coverage probability not stated."
			if r.Coverage > 0 && r.Coverage < 1 {
				text = "Coverage probability " + fmtCoverage(r.Coverage) + "."
			}
			if methods["GUM"] {
				text += " GUM: law of propagation (JCGM 100:2008), U = k·u, k from the effective degrees of freedom νeff (Welch–Satterthwaite)."
			}
			text += mc
		case methods["GUM"] && methods["MC"]:
			text += " Evaluated by the law of propagation (JCGM 100:2008, GUM) or by Monte Carlo (JCGM 101:2008, MC)."
		case methods["MC"]:
			text += " Evaluated by Monte Carlo (JCGM 101:2008)."
		case methods["GUM"]:
			text += " Evaluated by the law of propagation of uncertainty (JCGM 100:2008)."
		}
		if methods[sequencer.MethodMaxMC] {
			text += " Results marked MC-max are maxima: their U comes from a Monte Carlo of the maximum (JCGM 101:2008; see the note under the results) and k = U/u."
		}
		fs = append(fs, para{"Coverage", text})
	}
	if anyCond {
		fs = append(fs, para{"Conditional zones", "In a conditional zone conformity cannot be stated at this coverage probability; " +
			"the limit file's policy decides whether such a result ships, fails or goes to review."})
	}
	if r.Verdict == sequencer.Review {
		fs = append(fs, para{"Review", "This unit is held for review by a person before it ships; the reasons are listed above."})
	} else if dp := d.decided(); dp != nil {
		fs = append(fs, para{"Review", "This unit was held for review and " + dp.OnReview() + " by a person; see “Review decision” above."})
	}
	if statements {
		fs = append(fs, para{"Statements", "The statement of each toleranced limit is listed under “Decision statements” in the measurement detail."})
	}
	d.heading("Decision rule", 3*pdfdoc.Body.LineH())
	d.fields(fs)
}

// capital returns s with its first letter in upper case.
func capital(s string) string {
	if s == "" {
		return s
	}
	return strings.ToUpper(s[:1]) + s[1:]
}

// joinAnd joins items as "a", "a and b", "a, b and c".
func joinAnd(items []string) string {
	switch len(items) {
	case 0:
		return ""
	case 1:
		return items[0]
	}
	return strings.Join(items[:len(items)-1], ", ") + " and " + items[len(items)-1]
}
