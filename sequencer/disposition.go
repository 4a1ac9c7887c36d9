package sequencer

import "time"

// Final is the verdict a reviewer's decision gives the unit: PASS for
// DecisionAccept, FAIL for DecisionReject; ok is false for any other word.
func (d *Disposition) Final() (v Verdict, ok bool) {
	switch d.Decision {
	case DecisionAccept:
		return Pass, true
	case DecisionReject:
		return Fail, true
	}
	return "", false
}

// OnReview says in words how a review decided the unit, for the verdict box and
// the audit: "accepted on review", "rejected on review"; "" for a word that is
// no decision.
func (d *Disposition) OnReview() string {
	switch d.Decision {
	case DecisionAccept:
		return "accepted on review"
	case DecisionReject:
		return "rejected on review"
	}
	return ""
}

// NewRunID returns a new run id as the engine makes them (the time, in UTC to
// the millisecond, and 8 random hex digits): for a record made from another,
// such as a review decision's.
func NewRunID(now time.Time) string { return newID(now) }
