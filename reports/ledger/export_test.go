package ledger

import "trimline/sequencer"

// Internals exported to the external tests in package ledger_test.
var (
	CanonicalJSON  = canonicalJSON
	DecodeExtended = decodeExtended
	ChainHash      = chainHash
	AuditHash      = auditHash
)

// SetAfterMigration sets the hook migrate calls after each migration, until the
// test ends.
func SetAfterMigration(t interface{ Cleanup(func()) }, f func(version int)) {
	afterMigration = f
	t.Cleanup(func() { afterMigration = nil })
}

// LatestMigration is the version of the newest embedded migration.
func LatestMigration() int {
	m, err := embeddedMigrations()
	if err != nil {
		panic(err)
	}
	return m[len(m)-1].version
}

// RecordRows returns, for every table of query rows, its columns (run_id first)
// and the rows RecordRunWith writes for rec, for tests that build old files.
func RecordRows(rec *sequencer.Record) (tables []string, columns map[string][]string, rows map[string][][]any) {
	all, err := recordRows(rec)
	if err != nil {
		panic(err)
	}
	columns, rows = map[string][]string{}, map[string][][]any{}
	for i, t := range derivedTables {
		tables = append(tables, t.name)
		columns[t.name] = append([]string{"run_id"}, t.columns...)
		for _, r := range all[i] {
			rows[t.name] = append(rows[t.name], append([]any{rec.RunID}, r.vals...))
		}
	}
	return tables, columns, rows
}
