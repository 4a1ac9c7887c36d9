package limits

// Verdicts judges one unit like Judge followed by Overall, but keeps only the
// verdicts: it runs the same guards, decision rule and expressions as Judge (the
// same code), and skips what only a person reads: no Outcome, statement or reason,
// and no probability of being outside the tolerance. Re-judging many stored units
// costs a fraction of Judge.
//
// When perLimit is at least len(s.Limits) long, perLimit[i] is set to the verdict
// of s.Limits[i], the worst over its channels for a limit judged per channel (VerdictPass, VerdictReview or VerdictFail, as Overall would rank
// that limit's outcome); a shorter slice (nil) is left alone. The overall verdict
// is returned, and is always the one Overall gives for Judge's outcomes (VerdictFail
// for a nil Set or one without limits). Verdicts does not change the Set or
// results and is safe for concurrent use.
func (s *Set) Verdicts(results map[string]Value, perLimit []string) string {
	if s == nil || len(s.Limits) == 0 {
		return VerdictFail
	}
	pol := s.Policy()
	fill := len(perLimit) >= len(s.Limits)
	worst := VerdictPass
	for i, l := range s.Limits {
		var v string
		if chans := s.channelsOf(l); chans == nil {
			v = l.verdictOnly(results, pol)
		} else {
			v = VerdictPass
			for _, ch := range chans {
				if w := l.verdictOnly(s.view(l, results, ch), pol); rank(w) > rank(v) {
					v = w
				}
			}
		}
		if fill {
			perLimit[i] = v
		}
		if rank(v) > rank(worst) {
			worst = v
		}
	}
	return worst
}

// verdictOnly is judge followed by outcomeVerdict, without the words.
func (l *Limit) verdictOnly(results map[string]Value, pol Policy) string {
	var x float64
	for _, n := range l.Uses {
		v, why := l.value(results, n)
		if why != "" {
			return VerdictFail
		}
		x = v
	}
	if l.toleranced() {
		return l.rule(x, results[l.Uses[0]], pol).verdict
	}
	if l.prog == nil {
		return VerdictFail
	}
	out, err := l.run(results)
	if pass, ok := out.(bool); err == nil && ok && pass {
		return VerdictPass
	}
	return VerdictFail
}
