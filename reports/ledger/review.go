package ledger

import (
	"context"
	"fmt"
)

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
