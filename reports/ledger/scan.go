package ledger

import (
	"context"
	"database/sql"
	"fmt"
	"time"
)

// The ledger's row readers: what every query that returns rows shares.

// scanner is a *sql.Row or *sql.Rows.
type scanner interface{ Scan(dest ...any) error }

// collect scans every row of a query with scan and closes the rows; qerr is the
// query's own error. It returns an empty, non-nil slice when there are no rows.
func collect[T any](rows *sql.Rows, qerr error, scan func(scanner) (T, error)) ([]T, error) {
	if qerr != nil {
		return nil, qerr
	}
	defer rows.Close()
	out := []T{}
	for rows.Next() {
		v, err := scan(rows)
		if err != nil {
			return nil, err
		}
		out = append(out, v)
	}
	return out, rows.Err()
}

// eachRow runs query in tx and calls f for every row.
func eachRow(ctx context.Context, tx *sql.Tx, query string, args []any, f func(rows *sql.Rows) error) error {
	rows, err := tx.QueryContext(ctx, query, args...)
	if err != nil {
		return err
	}
	defer rows.Close()
	for rows.Next() {
		if err := f(rows); err != nil {
			return err
		}
	}
	return rows.Err()
}

// stringSet reads the one column of query's rows in tx into a set.
func stringSet(ctx context.Context, tx *sql.Tx, query string) (map[string]bool, error) {
	set := map[string]bool{}
	err := eachRow(ctx, tx, query, nil, func(rows *sql.Rows) error {
		var s string
		err := rows.Scan(&s)
		set[s] = true
		return err
	})
	return set, err
}

// missingTrigger returns the first of want that the schema has no trigger of, ""
// when it has them all.
func missingTrigger(ctx context.Context, tx *sql.Tx, want []string) (string, error) {
	have, err := stringSet(ctx, tx, `SELECT name FROM sqlite_schema WHERE type = 'trigger'`)
	if err != nil {
		return "", err
	}
	for _, t := range want {
		if !have[t] {
			return t, nil
		}
	}
	return "", nil
}

// stamped finishes a scanned row that has a time and a signature: at (as stored,
// formatTime) parsed into *t, and an empty signature (NULL or an empty BLOB)
// made nil.
func stamped(at string, t *time.Time, sig *[]byte) error {
	var err error
	if *t, err = parseTime(at); err != nil {
		return err
	}
	if len(*sig) == 0 {
		*sig = nil
	}
	return nil
}

// chainOption is the one ChainOptions of opts (the zero value when there are
// none); more than one is ErrInvalid, reported for what ("verify chain").
func chainOption(what string, opts []ChainOptions) (ChainOptions, error) {
	switch len(opts) {
	case 0:
		return ChainOptions{}, nil
	case 1:
		return opts[0], nil
	}
	return ChainOptions{}, fmt.Errorf("ledger: %s: %d ChainOptions, want at most one: %w", what, len(opts), ErrInvalid)
}
