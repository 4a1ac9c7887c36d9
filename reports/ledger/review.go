package ledger

import (
	"context"
	"encoding/json"
	"fmt"
	"time"
)

// The audit trail's actions of a review decision (issuing.Issuer.Dispose). The
// entry's actor is the reviewer, its subject the certificate of the REVIEW run
// decided on, its detail a ReviewDetail.
const (
	ActionReviewAccept = "review accept"
	ActionReviewReject = "review reject"
)

// ReviewDetail is the detail of a review decision's audit trail entry: the
// record that carries the decision and its certificate, the reason, how the
// reviewer was known and, when the reviewer signed it, the signature over
// signing.ReviewMessage(subject, decision, actor, Reason, SignedAt).
type ReviewDetail struct {
	Certificate   string `json:"certificate"` // reissued with the final verdict
	RunID         string `json:"run_id"`      // the record carrying the decision
	OfRunID       string `json:"of_run_id"`   // the REVIEW run decided on
	Reason        string `json:"reason"`
	Authenticated string `json:"authenticated,omitempty"`
	// SignedAt is the time signed, RFC 3339 with nanoseconds, UTC, as signed;
	// PublicKey and Signature are base64 (standard encoding); all "" unsigned.
	SignedAt  string `json:"signed_at,omitempty"`
	KeyID     string `json:"key_id,omitempty"`
	PublicKey string `json:"public_key,omitempty"`
	Signature string `json:"signature,omitempty"`
}

// ReviewEntry is a review decision as the audit trail holds it.
type ReviewEntry struct {
	Seq      int64
	At       time.Time // when it was recorded, UTC
	Reviewer string    // the entry's actor
	Decision string    // "accept" or "reject"
	Of       string    // the certificate decided on (the entry's subject)
	ReviewDetail
}

// ReviewDecision returns the review decision recorded on certificate number
// (the first, if a damaged trail held two); ok is false when there is none.
// ErrCorrupt (wrapped) for a detail that does not decode.
func (l *Ledger) ReviewDecision(ctx context.Context, number string) (e ReviewEntry, ok bool, err error) {
	for _, action := range []string{ActionReviewAccept, ActionReviewReject} {
		a, found, err := firstEntry(ctx, l.db, number, action)
		if err != nil {
			return ReviewEntry{}, false, fmt.Errorf("ledger: review of %s: %w", number, err)
		}
		if !found || ok && e.Seq < a.Seq {
			continue
		}
		e = ReviewEntry{Seq: a.Seq, At: a.At, Reviewer: a.Actor, Decision: action[len("review "):], Of: number}
		if err := json.Unmarshal([]byte(a.Detail), &e.ReviewDetail); err != nil {
			return ReviewEntry{}, false, fmt.Errorf("ledger: audit trail entry %d: detail: %v: %w", a.Seq, err, ErrCorrupt)
		}
		ok = true
	}
	return e, ok, nil
}

// ReviewQueue lists the units waiting for a reviewer's decision: the REVIEW
// runs of station ("" = every station) whose certificate is current (neither
// superseded, by a retest or a review decision, nor voided), oldest first (the
// order they were stored in). Engineering runs are not listed: they never
// ship, so there is nothing to decide. It returns an empty slice when none
// waits; an error is the database's, wrapped.
func (l *Ledger) ReviewQueue(ctx context.Context, station string) ([]RunSummary, error) {
	rows, err := l.db.QueryContext(ctx, `SELECT `+runSummaryColumns+` FROM runs r
		WHERE verdict = 'REVIEW' AND certificate IS NOT NULL AND (? = '' OR station = ?)
		AND coalesce(json_extract(record_json, '$.engineering'), 0) = 0
		AND NOT EXISTS (SELECT 1 FROM audit_trail a WHERE a.subject = r.certificate AND a.action IN (?, ?))
		ORDER BY rowid`, station, station, ActionSupersede, ActionVoid)
	out, err := collect(rows, err, scanRunSummary)
	if err != nil {
		return nil, fmt.Errorf("ledger: review queue: %w", err)
	}
	return out, nil
}
