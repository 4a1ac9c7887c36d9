package ledger

import (
	"context"
	"database/sql"
	"encoding/json"
	"errors"
	"fmt"
	"time"

	"trimline/sequencer"
)

// ErrDecided: a review decision on a certificate that is no longer current
// (decided already, retested or voided), refused by RecordRunWith.
var ErrDecided = errors.New("ledger: certificate no longer current")

// The audit trail's actions of a review decision (issuing.Issuer.Dispose). The
// entry's actor is the reviewer, its subject the certificate of the REVIEW run
// decided on, its detail a ReviewDetail. The ledger writes them itself, with the
// decision's record (RecordOptions.Review); Audit refuses them, and VerifyChain
// checks each against the runs and the supersede entry of the decision.
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

// storeReview appends, inside tx, the audit trail entry of the review decision
// rec carries (rec.Disposition), whose certificate is cert, on the REVIEW run
// rec.RetestOf of certificate earlierCert; d is the entry's detail, completed
// here. It refuses (ErrInvalid) a record that carries no decision, a decision
// that is not the record's verdict or not on the run it retests, and a run
// decided on that was not held for REVIEW; and (ErrDecided) a certificate that
// is no longer current. It runs before the supersede entry is written, so that
// two decisions on one unit cannot both be stored.
func storeReview(ctx context.Context, tx *sql.Tx, at string, rec *sequencer.Record, cert, earlierCert string, d ReviewDetail) error {
	dp := rec.Disposition
	if dp == nil {
		return fmt.Errorf("review entry for a record that carries no decision: %w", ErrInvalid)
	}
	final, ok := dp.Final()
	switch {
	case !ok:
		return fmt.Errorf("review decision %q: %w", dp.Decision, ErrInvalid)
	case final != rec.Verdict:
		return fmt.Errorf("review decision %s recorded with verdict %s: %w", dp.Decision, rec.Verdict, ErrInvalid)
	case dp.Reviewer == "" || hasControl(dp.Reviewer) || hasControl(dp.Reason):
		return fmt.Errorf("review decision: no reviewer, or control characters in the reviewer or reason: %w", ErrInvalid)
	case cert == "" || rec.RetestOf == "" || dp.Of != rec.RetestOf || dp.OfCertificate == "" || dp.OfCertificate != earlierCert:
		return fmt.Errorf("review decision on run %s (%s) recorded as a retest of run %s (%s): %w", dp.Of, dp.OfCertificate, rec.RetestOf, earlierCert, ErrInvalid)
	}
	var verdict string
	if err := tx.QueryRowContext(ctx, `SELECT verdict FROM runs WHERE run_id = ?`, dp.Of).Scan(&verdict); err != nil {
		return fmt.Errorf("review of run %s: %w", dp.Of, err)
	}
	if verdict != string(sequencer.Review) {
		return fmt.Errorf("review of %s: run %s is %s, not held for REVIEW: %w", earlierCert, dp.Of, verdict, ErrInvalid)
	}
	for _, action := range []string{ActionSupersede, ActionVoid} {
		if _, done, err := firstEntry(ctx, tx, earlierCert, action); err != nil {
			return err
		} else if done {
			return fmt.Errorf("review of %s: %sd already: %w", earlierCert, action, ErrDecided)
		}
	}
	d.Certificate, d.RunID, d.OfRunID = cert, rec.RunID, dp.Of
	detail, err := json.Marshal(d)
	if err != nil {
		return err
	}
	action := ActionReviewAccept
	if dp.Decision == sequencer.DecisionReject {
		action = ActionReviewReject
	}
	_, err = appendAudit(ctx, tx, at, dp.Reviewer, action, earlierCert, string(detail))
	return err
}
