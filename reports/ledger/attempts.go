package ledger

import (
	"context"
	"fmt"
)

// MeasuredAttempts counts the runs of serial that measured the unit completely
// (PASS, FAIL or REVIEW) and are not a reviewer's disposition of an earlier run
// (Record.Disposition: a decision on a unit already measured, not another
// measurement), among the engineering runs when engineering is true and among
// the production runs otherwise (Record.Engineering). FAULT and ABORTED runs
// measured nothing and do not count. The sequence's retest.max_attempts bounds
// it (issuing.Issuer.CheckRetests).
func (l *Ledger) MeasuredAttempts(ctx context.Context, serial string, engineering bool) (int, error) {
	eng := 0
	if engineering {
		eng = 1
	}
	var n int
	err := l.db.QueryRowContext(ctx, `SELECT count(*) FROM runs
		WHERE serial = ? AND verdict IN ('PASS', 'FAIL', 'REVIEW')
		AND coalesce(json_extract(record_json, '$.engineering'), 0) = ?
		AND json_extract(record_json, '$.disposition') IS NULL`, serial, eng).Scan(&n)
	if err != nil {
		return 0, fmt.Errorf("ledger: attempts of %s: %w", serial, err)
	}
	return n, nil
}
