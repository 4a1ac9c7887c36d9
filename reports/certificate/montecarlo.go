package certificate

import (
	"fmt"
	"strconv"
	"strings"

	"trimline/sequencer"
)

// uncNote is the small print under a value with its uncertainty (uncLine) for
// the result's uncertainty unc, with expanded uncertainty U, coverage factor k
// and dof as the caller shows them. A Monte Carlo result with a coverage
// interval (unc.MC) reads "k = 1.99 · MC · GUM validated": its k is U/u, not
// from νeff, so νeff is left out; then whether the law of propagation's
// interval was validated by it (JCGM 101:2008 §8), "GUM not valid." when not
// (the cell holds one line). The Coverage paragraph says which interval and
// how many trials.
func uncNote(U, k, dof float64, unc sequencer.Uncertainty) string {
	mc := unc.MC
	if mc == nil || !hasU(U) {
		return uncLine(U, k, dof, unc.Method)
	}
	parts := []string{fmtK(k), "MC"}
	if mc.Capped {
		parts[1] += " (cap)"
	}
	if mc.Validated {
		parts = append(parts, "GUM validated")
	} else {
		parts = append(parts, "GUM not valid.")
	}
	return strings.Join(parts, " · ")
}

// mcCoverage is the Coverage paragraph's account of the Monte Carlo results
// of r (those with a coverage interval), "" when there are none: the kind of
// interval, the trials and how they were chosen, how U and k follow from the
// interval, and for how many results the GUM interval was validated.
func mcCoverage(r *sequencer.Record) string {
	var n, valid, capped, minM, maxM int
	kinds := map[string]bool{}
	adaptive, fixed := false, false
	for _, res := range r.Results {
		mc := res.Unc.MC
		if mc == nil || !hasU(res.Unc.Expanded) {
			continue
		}
		n++
		if mc.Validated {
			valid++
		}
		if mc.Capped {
			capped++
		}
		if minM == 0 || mc.Trials < minM {
			minM = mc.Trials
		}
		maxM = max(maxM, mc.Trials)
		kinds[mc.Interval] = true
		adaptive = adaptive || mc.Adaptive
		fixed = fixed || !mc.Adaptive
	}
	if n == 0 {
		return ""
	}
	var kind []string
	if kinds["symmetric"] {
		kind = append(kind, "probabilistically symmetric (§7.7)")
	}
	if kinds["shortest"] {
		kind = append(kind, "shortest (§7.8)")
	}
	trials := fmtTrials(minM)
	if maxM != minM {
		trials += " to " + fmtTrials(maxM)
	}
	how := "fixed in the sequence file"
	switch {
	case adaptive && fixed:
		how = "chosen by the adaptive procedure (§7.9) or fixed in the sequence file"
	case adaptive:
		how = "chosen by the adaptive procedure (§7.9) for two significant digits of u"
	}
	text := fmt.Sprintf(" MC: Monte Carlo (JCGM 101:2008), coverage interval %s from M = %s trials %s; "+
		"U is the larger distance from the value to an end of the interval, k = U/u. "+
		"The GUM interval is validated by it (§8, two significant digits) for %d of %d results.",
		joinAnd(kind), trials, how, valid, n)
	if capped > 0 {
		text += fmt.Sprintf(" For %d the trial cap stopped the adaptive procedure before its results stabilised.", capped)
	}
	return text
}

// fmtTrials writes a number of trials in plain digits: the page's line
// breaking splits at any space, a thin one included.
func fmtTrials(m int) string { return strconv.Itoa(m) }
