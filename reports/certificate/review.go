package certificate

import (
	"strings"
	"time"

	"trimline/reports/internal/pdfdoc"
	"trimline/sequencer"
)

// decided is the record's review decision when it carries one that gave the
// unit its final verdict (PASS on accept, FAIL on reject); nil otherwise.
func (d *doc) decided() *sequencer.Disposition {
	dp := d.rec.Disposition
	if dp == nil {
		return nil
	}
	if v, ok := dp.Final(); !ok || v != d.rec.Verdict {
		return nil
	}
	return dp
}

// testedAt is when the unit was tested: the end of the run, or for a review
// decision the end of the REVIEW run it decided on (the decision's own record
// starts and ends when it was decided, which is when its certificate is issued).
func (d *doc) testedAt() time.Time {
	if dp := d.decided(); dp != nil && !dp.Tested.IsZero() {
		return dp.Tested
	}
	return d.rec.Finished
}

// reviewDecision is the section of a certificate reissued on a reviewer's
// decision: who decided what, why, when, how the reviewer was known, and the
// REVIEW certificate this one replaces.
func (d *doc) reviewDecision() {
	dp := d.decided()
	if dp == nil {
		return
	}
	decision := "Accepted: the unit ships; its final verdict is PASS."
	if dp.Decision == sequencer.DecisionReject {
		decision = "Rejected: the unit does not ship; its final verdict is FAIL."
	}
	auth := dash(dp.Authenticated)
	if id, ok := strings.CutPrefix(dp.Authenticated, "key "); ok {
		auth = "signed with the reviewer's key " + id + " (the signature is kept in the ledger's audit trail)"
	}
	replaces := "certificate " + dash(dp.OfCertificate) + " (run " + dash(dp.Of) + "), which held the unit for REVIEW; " +
		"it is superseded by this certificate"
	d.heading("Review decision", 20)
	d.fields([]para{
		{"Decision", decision},
		{"Reviewer", dash(dp.Reviewer)},
		{"Reason", dash(dp.Reason)},
		{"Decided", fmtTime(dp.At)},
		{"Authenticated", auth},
		{"Replaces", replaces},
	})
	d.note("The measurement is that of the run held for REVIEW: its readings, results and decisions against the limits " +
		"are given below unchanged; only the final verdict is the reviewer's.")
}

// reviewLook is the verdict box's line for a review decision: "accepted on
// review by NAME".
func reviewLook(dp *sequencer.Disposition) (pdfdoc.Color, string) {
	c := pdfdoc.Pass
	if dp.Decision == sequencer.DecisionReject {
		c = pdfdoc.Fail
	}
	return c, dp.OnReview() + " by " + dash(dp.Reviewer)
}
