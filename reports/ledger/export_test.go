package ledger

// Internals exported to the external tests in package ledger_test.
var (
	CanonicalJSON  = canonicalJSON
	DecodeExtended = decodeExtended
)
