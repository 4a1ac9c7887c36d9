package ledger

import (
	"context"
	"database/sql"
	"embed"
	"errors"
	"fmt"
	"io/fs"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"time"
)

//go:embed migrations/*.sql
var migrationFS embed.FS

// Migration is one schema migration applied to a ledger file. Version numbers start
// at 1 and have no gaps; Name is the file name's words ("init" for 0001_init.sql).
type Migration struct {
	Version   int
	Name      string
	AppliedAt time.Time // UTC
}

type migrationFile struct {
	version int
	name    string
	sql     string // the whole file
	// parts is sql split at the backfill marker: without a marker one part; with
	// one, two parts, and backfill runs between them in the same transaction.
	parts    []string
	backfill func(ctx context.Context, tx *sql.Tx) error
}

// backfillMarker is the line that splits a migration whose data is completed by Go
// code (hashes SQLite cannot compute) into the part before and the part after it.
const backfillMarker = "-- trimline:backfill"

// backfills are the Go steps of the migrations that have a backfill marker, by version.
var backfills = map[int]func(ctx context.Context, tx *sql.Tx) error{
	3: backfill0003,
	7: backfill0007,
	8: backfill0008,
}

var migrationName = regexp.MustCompile(`^([0-9]{4})_([a-z0-9_]+)\.sql$`)

// embeddedMigrations returns the embedded migrations in version order. Their files
// must be named NNNN_words.sql, numbered 1, 2, 3, ... without gaps.
func embeddedMigrations() ([]migrationFile, error) {
	names, err := fs.Glob(migrationFS, "migrations/*.sql")
	if err != nil {
		return nil, err
	}
	var out []migrationFile
	for _, p := range names {
		base := p[len("migrations/"):]
		m := migrationName.FindStringSubmatch(base)
		if m == nil {
			return nil, fmt.Errorf("embedded migration %s: name is not NNNN_words.sql", base)
		}
		v, _ := strconv.Atoi(m[1])
		b, err := migrationFS.ReadFile(p)
		if err != nil {
			return nil, err
		}
		mf := migrationFile{version: v, name: m[2], sql: string(b), backfill: backfills[v]}
		before, after, marked := strings.Cut(mf.sql, "\n"+backfillMarker+"\n")
		switch {
		case marked && mf.backfill == nil:
			return nil, fmt.Errorf("embedded migration %s: backfill marker but no backfill step", base)
		case !marked && mf.backfill != nil:
			return nil, fmt.Errorf("embedded migration %s: backfill step but no %q line", base, backfillMarker)
		case marked:
			mf.parts = []string{before, after}
		default:
			mf.parts = []string{mf.sql}
		}
		out = append(out, mf)
	}
	slices.SortFunc(out, func(a, b migrationFile) int { return a.version - b.version })
	for i, m := range out {
		if m.version != i+1 {
			return nil, fmt.Errorf("embedded migrations: version %d where %d was expected", m.version, i+1)
		}
	}
	if len(out) == 0 {
		return nil, errors.New("embedded migrations: none")
	}
	return out, nil
}

// migrate brings the file's schema up to the embedded migrations. Each migration runs
// in its own BEGIN IMMEDIATE transaction that first checks whether another process
// applied it meanwhile, so concurrent Opens apply each migration exactly once.
//
// Migrations run on one connection with foreign_keys off, so that a migration may
// rebuild a table that other tables refer to (SQLite's table-rebuild procedure:
// create the new table, copy, drop the old one, rename); before its transaction
// commits, PRAGMA foreign_key_check must report nothing, else the migration is
// rolled back. The connection's foreign_keys is switched back on afterwards.
//
// A migration whose new columns need values SQLite cannot compute (SHA-256 hash
// chains) has a "-- trimline:backfill" line: the part before it runs, then the
// migration's Go step (backfills), then the part after it, all in the one
// transaction, so a ledger is never left half upgraded.
func (l *Ledger) migrate(ctx context.Context) (err error) {
	migs, err := embeddedMigrations()
	if err != nil {
		return err
	}
	if err := l.inTx(ctx, func(tx *sql.Tx) error {
		_, err := tx.ExecContext(ctx, `CREATE TABLE IF NOT EXISTS schema_migrations (
			version    INTEGER PRIMARY KEY,
			name       TEXT NOT NULL,
			applied_at TEXT NOT NULL
		) STRICT`)
		return err
	}); err != nil {
		return fmt.Errorf("schema_migrations: %w", err)
	}
	if err := l.checkApplied(ctx, migs); err != nil {
		return err
	}
	conn, err := l.db.Conn(ctx)
	if err != nil {
		return err
	}
	defer conn.Close()
	if _, err := conn.ExecContext(ctx, `PRAGMA foreign_keys = OFF`); err != nil {
		return fmt.Errorf("foreign_keys off for migrations: %w", err)
	}
	defer func() {
		// Back on before the connection returns to the pool. Open fails (and closes
		// every connection) when this fails, so no connection stays without it.
		if _, ferr := conn.ExecContext(context.WithoutCancel(ctx), `PRAGMA foreign_keys = ON`); ferr != nil && err == nil {
			err = fmt.Errorf("foreign_keys on after migrations: %w", ferr)
		}
	}()
	for _, m := range migs {
		err := runTx(ctx, conn, nil, func(tx *sql.Tx) error {
			var n int
			if err := tx.QueryRowContext(ctx, `SELECT count(*) FROM schema_migrations WHERE version = ?`, m.version).Scan(&n); err != nil {
				return err
			}
			if n > 0 {
				return nil // applied already, possibly by another process a moment ago
			}
			for i, part := range m.parts {
				if i > 0 {
					if err := m.backfill(ctx, tx); err != nil {
						return fmt.Errorf("backfill: %w", err)
					}
				}
				if _, err := tx.ExecContext(ctx, part); err != nil {
					return err
				}
			}
			if err := foreignKeyCheck(ctx, tx); err != nil {
				return err
			}
			_, err := tx.ExecContext(ctx, `INSERT INTO schema_migrations (version, name, applied_at) VALUES (?, ?, ?)`,
				m.version, m.name, formatTime(time.Now()))
			return err
		})
		if err != nil {
			return fmt.Errorf("migration %04d_%s: %w", m.version, m.name, err)
		}
		if afterMigration != nil {
			afterMigration(m.version)
		}
	}
	return nil
}

// afterMigration, when not nil, is called after each migration migrate applies or
// finds applied; tests use it to act between two migrations.
var afterMigration func(version int)

// foreignKeyCheck fails with ErrCorrupt if any row refers to a missing parent.
func foreignKeyCheck(ctx context.Context, tx *sql.Tx) error {
	rows, err := tx.QueryContext(ctx, `PRAGMA foreign_key_check`)
	if err != nil {
		return err
	}
	defer rows.Close()
	if rows.Next() {
		var table, parent string
		var rowid sql.NullInt64
		var fk int
		if err := rows.Scan(&table, &rowid, &parent, &fk); err != nil {
			return err
		}
		return fmt.Errorf("foreign key check: row %d of %s refers to a missing %s: %w", rowid.Int64, table, parent, ErrCorrupt)
	}
	return rows.Err()
}

// beginner is a *sql.DB or a *sql.Conn.
type beginner interface {
	BeginTx(ctx context.Context, opts *sql.TxOptions) (*sql.Tx, error)
}

// runTx runs f in a transaction of b begun with opts and commits it when f
// returns nil; otherwise (and on a panic) it rolls back and returns f's error.
func runTx(ctx context.Context, b beginner, opts *sql.TxOptions, f func(tx *sql.Tx) error) error {
	tx, err := b.BeginTx(ctx, opts)
	if err != nil {
		return err
	}
	defer tx.Rollback()
	if err := f(tx); err != nil {
		return err
	}
	return tx.Commit()
}

// checkApplied fails if the file has a migration this program does not know
// (ErrSchemaTooNew) or one whose name differs from the embedded one (ErrCorrupt).
func (l *Ledger) checkApplied(ctx context.Context, known []migrationFile) error {
	applied, err := l.Migrations(ctx)
	if err != nil {
		return err
	}
	latest := known[len(known)-1].version
	for _, a := range applied {
		if a.Version > latest {
			return fmt.Errorf("file has migration %d (%s), this program knows up to %d: %w", a.Version, a.Name, latest, ErrSchemaTooNew)
		}
		if a.Version < 1 || known[a.Version-1].name != a.Name {
			return fmt.Errorf("file has migration %d named %q, this program's is %q: %w", a.Version, a.Name, nameOf(known, a.Version), ErrCorrupt)
		}
	}
	return nil
}

func nameOf(known []migrationFile, v int) string {
	if v < 1 || v > len(known) {
		return ""
	}
	return known[v-1].name
}

// inTx runs f in a write transaction (runTx).
func (l *Ledger) inTx(ctx context.Context, f func(tx *sql.Tx) error) error {
	return runTx(ctx, l.db, nil, f)
}

// Migrations returns the migrations applied to the ledger file, in version order.
func (l *Ledger) Migrations(ctx context.Context) ([]Migration, error) {
	rows, err := l.db.QueryContext(ctx, `SELECT version, name, applied_at FROM schema_migrations ORDER BY version`)
	out, err := collect(rows, err, func(r scanner) (Migration, error) {
		var m Migration
		var at string
		if err := r.Scan(&m.Version, &m.Name, &at); err != nil {
			return m, err
		}
		var err error
		m.AppliedAt, err = parseTime(at)
		return m, err
	})
	if err != nil {
		return nil, fmt.Errorf("ledger: migrations: %w", err)
	}
	return out, nil
}
