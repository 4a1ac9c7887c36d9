package ledger

import (
	"context"
	"database/sql"
	"errors"
	"fmt"
	"time"
)

// Lease says which process holds a run while it publishes the run's certificate:
// the host and process id of the holder, when it took the lease and until when the
// lease holds unless renewed. Times are UTC.
type Lease struct {
	RunID   string
	Host    string
	PID     int
	Started time.Time
	Expires time.Time
}

// ClaimLease takes the lease on run lease.RunID for lease's holder, unless another
// holder has it and it is still held: not expired at l.Now() and, when held is not
// nil, held(existing) reports true (held tells whether the holder still exists; nil
// means every unexpired lease is held). It reports whether the lease is now lease's. The run need not be
// stored yet: a process takes the lease before it stores the run.
func (l *Ledger) ClaimLease(ctx context.Context, lease Lease, held func(Lease) bool) (bool, error) {
	if lease.RunID == "" {
		return false, fmt.Errorf("ledger: lease: empty run id: %w", ErrInvalid)
	}
	took := false
	err := l.inTx(ctx, func(tx *sql.Tx) error {
		old, ok, err := leaseOf(ctx, tx, lease.RunID)
		if err != nil {
			return err
		}
		if ok && old.Expires.After(l.now()) && (held == nil || held(old)) {
			return nil
		}
		_, err = tx.ExecContext(ctx, `INSERT INTO leases (run_id, host, pid, started_at, expires_at) VALUES (?, ?, ?, ?, ?)
			ON CONFLICT (run_id) DO UPDATE SET host = excluded.host, pid = excluded.pid,
				started_at = excluded.started_at, expires_at = excluded.expires_at`,
			lease.RunID, lease.Host, lease.PID, formatTime(lease.Started), formatTime(lease.Expires))
		took = err == nil
		return err
	})
	if err != nil {
		return false, fmt.Errorf("ledger: lease on run %s: %w", lease.RunID, err)
	}
	return took, nil
}

// RenewLease moves the expiry of lease (held by lease.Host and lease.PID) to
// lease.Expires. It fails with ErrNotFound (wrapped) if the lease is no longer
// this holder's.
func (l *Ledger) RenewLease(ctx context.Context, lease Lease) error {
	res, err := l.db.ExecContext(ctx, `UPDATE leases SET expires_at = ? WHERE run_id = ? AND host = ? AND pid = ?`,
		formatTime(lease.Expires), lease.RunID, lease.Host, lease.PID)
	if err == nil {
		if n, _ := res.RowsAffected(); n == 0 {
			err = ErrNotFound
		}
	}
	if err != nil {
		return fmt.Errorf("ledger: renew lease on run %s: %w", lease.RunID, err)
	}
	return nil
}

// ReleaseLease gives back lease, if its holder still has it; releasing a lease
// that is gone is not an error.
func (l *Ledger) ReleaseLease(ctx context.Context, lease Lease) error {
	if _, err := l.db.ExecContext(ctx, `DELETE FROM leases WHERE run_id = ? AND host = ? AND pid = ?`,
		lease.RunID, lease.Host, lease.PID); err != nil {
		return fmt.Errorf("ledger: release lease on run %s: %w", lease.RunID, err)
	}
	return nil
}

// LeaseOf returns the lease on run runID and whether there is one.
func (l *Ledger) LeaseOf(ctx context.Context, runID string) (Lease, bool, error) {
	le, ok, err := leaseOf(ctx, l.db, runID)
	if err != nil {
		return Lease{}, false, fmt.Errorf("ledger: lease on run %s: %w", runID, err)
	}
	return le, ok, nil
}

func leaseOf(ctx context.Context, q querier, runID string) (Lease, bool, error) {
	le := Lease{RunID: runID}
	var started, expires string
	err := q.QueryRowContext(ctx, `SELECT host, pid, started_at, expires_at FROM leases WHERE run_id = ?`, runID).
		Scan(&le.Host, &le.PID, &started, &expires)
	if errors.Is(err, sql.ErrNoRows) {
		return Lease{}, false, nil
	}
	if err != nil {
		return Lease{}, false, err
	}
	if le.Started, err = parseTime(started); err != nil {
		return Lease{}, false, err
	}
	if le.Expires, err = parseTime(expires); err != nil {
		return Lease{}, false, err
	}
	return le, true, nil
}

// RunIDOfCertificate returns the run certificate number was issued for.
// ErrNotFound (wrapped) for a number no run has.
func (l *Ledger) RunIDOfCertificate(ctx context.Context, number string) (string, error) {
	id, err := runOfCertificate(ctx, l.db, number)
	if err != nil {
		return "", fmt.Errorf("ledger: certificate %s: %w", number, err)
	}
	return id, nil
}

// Leases returns every lease in the ledger, by run id.
func (l *Ledger) Leases(ctx context.Context) ([]Lease, error) {
	rows, err := l.db.QueryContext(ctx, `SELECT run_id FROM leases ORDER BY run_id`)
	ids, err := collect(rows, err, func(r scanner) (string, error) {
		var id string
		return id, r.Scan(&id)
	})
	if err != nil {
		return nil, fmt.Errorf("ledger: leases: %w", err)
	}
	out := make([]Lease, 0, len(ids))
	for _, id := range ids {
		le, ok, err := l.LeaseOf(ctx, id)
		if err != nil {
			return nil, err
		}
		if ok {
			out = append(out, le)
		}
	}
	return out, nil
}

// DropAbandonedLeases deletes the leases nobody holds any more: expired at
// l.Now(), or, when held is not nil, whose holder held reports gone. A killed
// process leaves its lease behind; this keeps such leases from piling up. It
// reports how many it deleted.
func (l *Ledger) DropAbandonedLeases(ctx context.Context, held func(Lease) bool) (int, error) {
	n := 0
	err := l.inTx(ctx, func(tx *sql.Tx) error {
		rows, err := tx.QueryContext(ctx, `SELECT run_id FROM leases ORDER BY run_id`)
		ids, err := collect(rows, err, func(r scanner) (string, error) {
			var id string
			return id, r.Scan(&id)
		})
		if err != nil {
			return err
		}
		for _, id := range ids {
			le, ok, err := leaseOf(ctx, tx, id)
			if err != nil || !ok {
				return err
			}
			if le.Expires.After(l.now()) && (held == nil || held(le)) {
				continue
			}
			if _, err := tx.ExecContext(ctx, `DELETE FROM leases WHERE run_id = ?`, id); err != nil {
				return err
			}
			n++
		}
		return nil
	})
	if err != nil {
		return 0, fmt.Errorf("ledger: drop abandoned leases: %w", err)
	}
	return n, nil
}
