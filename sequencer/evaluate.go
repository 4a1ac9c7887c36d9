package sequencer

// The verdict of one run: results judged against the limit file. Nothing here
// does I/O, so Replay runs the very code the engine ran.

import (
	"fmt"

	"trimline/limits"
)

// finish marks every result no step computed (the run ended before it), stores
// the results and judges them.
func finish(u *Unit) {
	why := u.endNote
	if why == "" {
		why = "not measured"
	}
	u.res.unset(why)
	u.Rec.Results = u.res.list()
	judge(u)
}

// judge evaluates every limit and sets the verdict following the limit file's
// policy for conditional zones; earlier reasons (a saturated trim) make it FAIL.
func judge(u *Unit) {
	rec, set := u.Rec, u.seq.Limits
	rec.Coverage = coverage(u.seq)
	rec.Outcomes = set.Judge(u.res.values)
	failedBefore := len(rec.Reasons) > 0
	// As-found limits first (an untrimmed value far out names an assembly fault, the
	// real cause), then what stopped the run (a saturated trim), then the rest.
	var asFound, later []string
	for _, o := range rec.Outcomes {
		if o.Pass {
			continue
		}
		r := fmt.Sprintf("limit %q: %s", o.Name, o.Reason)
		if o.Channel != "" {
			r = fmt.Sprintf("limit %q, channel %s: %s", o.Name, o.Channel, o.Reason)
		}
		if usesStage(u.seq, o.Uses, AsFound) {
			asFound = append(asFound, r)
		} else {
			later = append(later, r)
		}
	}
	rec.Reasons = append(append(asFound, rec.Reasons...), later...)
	switch overall := set.Overall(rec.Outcomes); {
	case failedBefore || overall == limits.VerdictFail:
		rec.Verdict = Fail
	case overall == limits.VerdictReview:
		rec.Verdict = Review
	default:
		rec.Verdict = Pass
	}
}

// usesStage reports whether any of the named results is of stage s.
func usesStage(seq *Sequence, names []string, s Stage) bool {
	for _, n := range names {
		if d, ok := seq.LookupResult(n); ok && d.Stage == s {
			return true
		}
	}
	return false
}
