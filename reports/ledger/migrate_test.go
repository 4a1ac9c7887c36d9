package ledger_test

import (
	"crypto/sha256"
	"database/sql"
	"encoding/hex"
	"encoding/json"
	"errors"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"trimline/reports/ledger"
	"trimline/sequencer"
)

// oldLedger makes a ledger file as trimline made it before migration 0002: the
// 0001 schema, schema_migrations holding version 1 only, one PASS run with its
// certificate and document and one FAULT run, stored with the rows 0001 has. It
// returns the path and the two records.
func oldLedger(t *testing.T) (string, *sequencer.Record, *sequencer.Record) {
	t.Helper()
	init, err := os.ReadFile(filepath.Join("migrations", "0001_init.sql"))
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "old.db")
	db, exec := oldFile(t, path)
	defer db.Close()
	exec(string(init))
	exec(`INSERT INTO schema_migrations VALUES (1, 'init', '2025-01-02T03:04:05.000000000Z')`)

	// Records as the old engine made them: no uncertainty, decision, coverage or
	// conditions.
	old := func(id string, v sequencer.Verdict) *sequencer.Record {
		rec := makeRecord(id, "SN-OLD", v, recordShape{sweeps: 1, points: 2, readings: 2})
		rec.Coverage, rec.Conditions = 0, sequencer.Conditions{}
		for i := range rec.Results {
			rec.Results[i].Unc = sequencer.Uncertainty{}
		}
		for i := range rec.Outcomes {
			rec.Outcomes[i].Decision = nil
		}
		return rec
	}
	pass, fault := old("old-pass", sequencer.Pass), old("old-fault", sequencer.Fault)
	exec(`INSERT INTO units VALUES ('SN-OLD', 'AMP-10', '2025-06-03T07:14:27.123456789Z', '2025-06-03T07:15:08.123456796Z')`)
	exec(`INSERT INTO cert_sequences VALUES ('OLD', 1)`)
	for _, rec := range []*sequencer.Record{pass, fault} {
		doc, err := ledger.CanonicalJSON(rec)
		if err != nil {
			t.Fatal(err)
		}
		var cert any
		if rec.Verdict == sequencer.Pass {
			cert = "OLD-000001"
		}
		// The row repeats the record's header, as the ledger has always stored it.
		reasons, _ := json.Marshal(append([]string{}, rec.Reasons...))
		var fault any
		if rec.Fault != "" {
			fault = rec.Fault
		}
		exec(`INSERT INTO runs VALUES (?, 'SN-OLD', 'AMP-10', 'C', 'EOL-2', 'op17', 'trimline 0.1.0',
			?, ?, ?, ?, ?, ?, ?, ?)`,
			rec.RunID, rec.Started.UTC().Format("2006-01-02T15:04:05.000000000Z"), rec.Finished.UTC().Format("2006-01-02T15:04:05.000000000Z"),
			string(rec.Verdict), fault, string(reasons), cert, string(doc), sha(doc))
		insertRecordRows(t, db, exec, rec)
	}
	exec(`INSERT INTO documents VALUES ('old-pass', 'OLD-000001', '/c/OLD-000001.pdf', ?, 10, '2025-06-03T07:16:00.000000000Z')`, strings.Repeat("0", 64))
	return path, pass, fault
}

// A ledger made with only migration 0001 upgrades to 0002: its runs and rows are
// kept (records re-read byte for byte), the new columns are NULL for them, REVIEW
// runs can be stored and numbered, the runs table keeps its indexes, triggers and
// foreign keys, and the schema is the one a new ledger gets.
func TestMigrateFrom0001(t *testing.T) {
	path, pass, fault := oldLedger(t)
	l, err := ledger.Open(ctx, path)
	if err != nil {
		t.Fatalf("open 0001 ledger: %v", err)
	}
	defer l.Close()

	migs, err := l.Migrations(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if len(migs) != ledger.LatestMigration() || migs[0].Version != 1 || migs[0].AppliedAt.Format("2006") != "2025" || migs[1].Version != 2 || migs[1].Name != "uncertainty" ||
		migs[2].Version != 3 || migs[2].Name != "tamper_evidence" {
		t.Fatalf("Migrations after upgrade = %+v", migs)
	}
	for _, want := range []*sequencer.Record{pass, fault} {
		got, err := l.Run(ctx, want.RunID)
		if err != nil {
			t.Fatalf("old run %s after upgrade: %v", want.RunID, err)
		}
		requireSameRecord(t, want, got)
	}
	counts, err := l.Counts(ctx)
	if err != nil {
		t.Fatal(err)
	}
	if counts["runs"] != 2 || counts["readings"] != 8 || counts["results"] != 8 || counts["limit_outcomes"] != 6 || counts["documents"] != 1 {
		t.Errorf("counts after upgrade %v", counts)
	}

	db := rawDB(t, path)
	var nonNull int
	if err := db.QueryRow(`SELECT
		(SELECT count(*) FROM runs WHERE coverage IS NOT NULL OR ambient_c IS NOT NULL OR ambient_source IS NOT NULL) +
		(SELECT count(*) FROM results WHERE u IS NOT NULL OR dof IS NOT NULL OR k IS NOT NULL OR expanded_u IS NOT NULL OR method IS NOT NULL) +
		(SELECT count(*) FROM limit_outcomes WHERE rule IS NOT NULL OR zone IS NOT NULL OR tur IS NOT NULL OR binary IS NOT NULL OR statement IS NOT NULL)`).Scan(&nonNull); err != nil {
		t.Fatal(err)
	}
	if nonNull != 0 {
		t.Errorf("%d old rows have values in the new columns, want all NULL", nonNull)
	}

	// New runs go on from the old sequence; REVIEW is a verdict the file now takes.
	review := makeRecord("new-review", "SN-OLD", sequencer.Review, recordShape{sweeps: 1, points: 2, readings: 2})
	if cert := mustRecord(t, l, review, "OLD"); cert != "OLD-000002" {
		t.Errorf("REVIEW run after upgrade: certificate %q, want OLD-000002", cert)
	}
	if got, err := l.Run(ctx, review.RunID); err != nil {
		t.Fatal(err)
	} else {
		requireSameRecord(t, review, got)
	}
	var verdict, cert string
	var coverage float64
	if err := db.QueryRow(`SELECT verdict, certificate, coverage FROM runs WHERE run_id = 'new-review'`).Scan(&verdict, &cert, &coverage); err != nil {
		t.Fatal(err)
	}
	if verdict != "REVIEW" || cert != "OLD-000002" || coverage != 0.9545 {
		t.Errorf("REVIEW row: %s %s %g", verdict, cert, coverage)
	}

	// The rebuilt runs table is still append-only, still checks its verdicts and is
	// still the parent of every run's rows.
	for _, q := range []string{
		`UPDATE runs SET verdict = 'FAIL' WHERE run_id = 'old-pass'`,
		`DELETE FROM runs WHERE run_id = 'old-fault'`,
		`INSERT INTO runs (run_id, serial, product, revision, station, operator, software, started, finished, verdict, reasons, certificate, record_json, record_sha256)
			VALUES ('x', 'SN-OLD', '', '', '', '', '', '', '', 'MAYBE', '[]', NULL, '{}', '')`,
		`INSERT INTO runs (run_id, serial, product, revision, station, operator, software, started, finished, verdict, reasons, certificate, record_json, record_sha256)
			VALUES ('y', 'SN-OLD', '', '', '', '', '', '', '', 'REVIEW', '[]', NULL, '{}', '')`,
	} {
		if _, err := db.Exec(q); err == nil {
			t.Errorf("allowed after upgrade: %s", q)
		}
	}
	fk := rawDBWithForeignKeys(t, path)
	if _, err := fk.Exec(`INSERT INTO readings VALUES ('no-such-run', 's', 0, 0, 0, 0, 'ok', '')`); err == nil {
		t.Error("a reading of a run that does not exist was accepted after the upgrade")
	}
	if rows, err := fk.Query(`PRAGMA foreign_key_check`); err != nil {
		t.Fatal(err)
	} else {
		if rows.Next() {
			t.Error("foreign_key_check reports rows after the upgrade")
		}
		rows.Close()
	}

	// The upgraded schema is exactly the schema of a ledger made new.
	_, fresh := openLedger(t)
	if got, want := schemaOf(t, db), schemaOf(t, rawDB(t, fresh)); !reflect.DeepEqual(got, want) {
		t.Errorf("upgraded schema differs from a new ledger's:\n%s\nvs\n%s", strings.Join(got, "\n"), strings.Join(want, "\n"))
	}
}

// A migration that would leave a row without its parent is rolled back, and Open
// fails with ErrCorrupt: the file stays at 0001 and unchanged.
func TestMigrationRefusesDanglingRows(t *testing.T) {
	path, _, _ := oldLedger(t)
	db := rawDB(t, path) // foreign_keys off: the damage an outside tool could do
	if _, err := db.Exec(`INSERT INTO results VALUES ('vanished-run', 'x', 1, 'V', 1, '')`); err != nil {
		t.Fatal(err)
	}
	if _, err := ledger.Open(ctx, path); !errors.Is(err, ledger.ErrCorrupt) {
		t.Fatalf("open with a dangling row: %v, want ErrCorrupt", err)
	}
	var versions int
	var runsSQL string
	if err := db.QueryRow(`SELECT count(*) FROM schema_migrations`).Scan(&versions); err != nil {
		t.Fatal(err)
	}
	if err := db.QueryRow(`SELECT sql FROM sqlite_schema WHERE name = 'runs'`).Scan(&runsSQL); err != nil {
		t.Fatal(err)
	}
	if versions != 1 || strings.Contains(runsSQL, "REVIEW") || strings.Contains(runsSQL, "coverage") {
		t.Errorf("after the refused migration: %d versions, runs is\n%s", versions, runsSQL)
	}
}

func rawDBWithForeignKeys(t *testing.T, path string) *sql.DB {
	t.Helper()
	db, err := sql.Open("sqlite", "file:"+path+"?_pragma=busy_timeout(5000)&_pragma=foreign_keys(1)")
	if err != nil {
		t.Fatal(err)
	}
	db.SetMaxOpenConns(1)
	t.Cleanup(func() { db.Close() })
	return db
}

// schemaOf lists every table, index and trigger of the file with its SQL, except
// schema_migrations (made by migrate.go, not by a migration).
func schemaOf(t *testing.T, db *sql.DB) []string {
	t.Helper()
	rows, err := db.Query(`SELECT type, name, tbl_name, coalesce(sql, '') FROM sqlite_schema WHERE name <> 'schema_migrations' ORDER BY type, name`)
	if err != nil {
		t.Fatal(err)
	}
	defer rows.Close()
	var out []string
	for rows.Next() {
		var typ, name, tbl, q string
		if err := rows.Scan(&typ, &name, &tbl, &q); err != nil {
			t.Fatal(err)
		}
		out = append(out, typ+" "+name+" on "+tbl+": "+q)
	}
	if err := rows.Err(); err != nil {
		t.Fatal(err)
	}
	return out
}

func sha(b []byte) string {
	s := sha256.Sum256(b)
	return hex.EncodeToString(s[:])
}
