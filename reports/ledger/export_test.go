package ledger

// Internals exported to the external tests in package ledger_test.
var (
	CanonicalJSON  = canonicalJSON
	DecodeExtended = decodeExtended
	ChainHash      = chainHash
	AuditHash      = auditHash
)

// LatestMigration is the version of the newest embedded migration.
func LatestMigration() int {
	m, err := embeddedMigrations()
	if err != nil {
		panic(err)
	}
	return m[len(m)-1].version
}
