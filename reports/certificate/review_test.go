package certificate_test

import (
	"bytes"
	"strings"
	"testing"
	"time"

	"trimline/sequencer"
)

// decidedRecord is reviewRecord decided on by a reviewer: the decision's own
// record, made when the decision was (an hour after the test), with the
// decision's verdict.
func decidedRecord(decision string) *sequencer.Record {
	held := reviewRecord()
	r := reviewRecord()
	at := held.Finished.Add(time.Hour)
	r.RunID, r.RetestOf, r.Started, r.Finished = "decision-run", held.RunID, at, at
	r.Disposition = &sequencer.Disposition{Of: held.RunID, OfCertificate: "TL1-000041", Decision: decision,
		Reviewer: "Ada Quillfeather", Reason: "gain rechecked against the transfer standard", At: at, Tested: held.Finished,
		Authenticated: "key ed25519:0123456789abcdef"}
	r.Verdict, _ = r.Disposition.Final()
	return r
}

// A certificate reissued on a review decision states the final verdict with
// how it was reached, the test's time apart from the decision's, the REVIEW
// run's reasons as why the unit was held, and a "Review decision" section:
// reviewer, decision, reason, date, how the reviewer was known and the REVIEW
// certificate it replaces.
func TestReviewDecisionSection(t *testing.T) {
	for _, c := range []struct {
		decision string
		want     []string
	}{
		{sequencer.DecisionAccept, []string{"PASS", "accepted on review by Ada Quillfeather",
			"Accepted: the unit ships; its final verdict is PASS.",
			"This unit was held for review and accepted on review by a person"}},
		{sequencer.DecisionReject, []string{"FAIL", "rejected on review by Ada Quillfeather",
			"Rejected: the unit does not ship; its final verdict is FAIL."}},
	} {
		rec := decidedRecord(c.decision)
		pdf := render(t, rec, opt)
		if !bytes.Equal(pdf, render(t, decidedRecord(c.decision), opt)) {
			t.Errorf("%s: renders differently twice", c.decision)
		}
		text := pdfText(t, pdf)
		requireText(t, text, append(c.want,
			"Why the unit was held for REVIEW", rec.Reasons[0], "held for review",
			"Review decision", "Reviewer Ada Quillfeather", "Reason gain rechecked against the transfer standard",
			"Decided 2026-03-14 10:41:55 UTC",
			"signed with the reviewer's key ed25519:0123456789abcdef",
			"certificate TL1-000041 (run "+reviewRecord().RunID+"), which held the unit for REVIEW; it is superseded by this certificate",
			"Issued 2026-03-14 10:41:55 UTC", "Tested 2026-03-14 09:41:55 UTC",
		)...)
		if strings.Contains(text, "This unit is held for review by a person before it ships") || strings.Contains(text, "Why the verdict is") {
			t.Errorf("%s: the decided certificate still reads as held:\n%s", c.decision, text)
		}
	}
	// A REVIEW certificate has no such section.
	if text := pdfText(t, render(t, reviewRecord(), opt)); strings.Contains(text, "Review decision") {
		t.Error("a REVIEW certificate has a review decision")
	}
}
