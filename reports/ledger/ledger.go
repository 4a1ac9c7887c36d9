// Package ledger is the station's SQLite ledger: every run of every unit, with every
// reading, result, limit outcome, fit, trim code, input file and instrument, the
// certificate numbers issued, and the documents (certificate PDFs) made from them.
// Audits read it; nothing in it is ever updated or deleted (triggers refuse it),
// except a unit's last_seen/product and the certificate sequences, which only count up.
//
// The ledger is tamper-evident and self-contained, for an auditor years later:
//   - every run carries an optional signature (RecordOptions.Sign) over
//     signing.RecordMessage(certificate, run id, record SHA-256), and a link in a SHA-256
//     hash chain of its station (RecordRunWith describes the chain line);
//   - the exact bytes of the files in force are kept, content-addressed, in blobs;
//   - an append-only audit trail, hash-chained too, says who did what when: every
//     run recorded ("create"), document issued ("issue"), certificate voided
//     ("void") and whatever other parts report (Audit). A certificate's status is
//     derived from the trail; the certificate itself is never changed;
//   - VerifyChain re-checks all of it and names the first broken link.
//
// A hash chain has no secret: someone who can write the file can recompute every
// chain from the changed row on. Such a rewrite shows only against something kept
// elsewhere: the signatures (if the key is not on the station), the chain heads
// saved outside the ledger (ChainReport.HeadList, FormatHeads; checked later by
// CheckHeads), or the chain link every certificate carries (RunMeta.ChainHash).
//
// One ledger file may be shared by several processes and goroutines: writes take
// SQLite's write lock at BEGIN (BEGIN IMMEDIATE) and wait up to 5 s for it, WAL lets
// readers run alongside the writer, and certificate numbers are allocated inside the
// transaction that stores the run, so they have no gaps and no duplicates.
//
// Each run is stored twice: as rows for queries, and as the canonical JSON of the
// whole sequencer.Record with its SHA-256, which is what Run returns, so a stored run
// is re-read exactly. The rows are derived from the record by one function
// (rows.go), and VerifyChain checks every row against the signed record. The canonical JSON is json.Marshal's output; only where a float
// is NaN or ±Inf, which json.Marshal refuses, it holds the string "NaN", "Infinity"
// or "-Infinity" instead. In the rows, a REAL column is NULL where the value is not a
// finite number. In particular results.dof is NULL for an infinite number of degrees
// of freedom (math.Inf(1) in the record, "Infinity" in its JSON) when results.u is
// not NULL; all uncertainty columns are NULL for an uncertainty not evaluated.
//
// Times are stored as RFC 3339 text in UTC with nine fractional digits
// ("2006-01-02T15:04:05.000000000Z"), so they sort as text; times read back from the
// rows are in UTC.
package ledger

import (
	"context"
	"crypto/sha256"
	"database/sql"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"path/filepath"
	"slices"
	"strings"
	"time"
	"unicode"

	"modernc.org/sqlite" // registers the "sqlite" driver
	sqlite3 "modernc.org/sqlite/lib"

	"trimline/limits"
	"trimline/sequencer"
)

// Errors returned (wrapped) by the Ledger; test with errors.Is.
var (
	// ErrNotFound: the run id (or certificate number, document, blob) is not in the ledger.
	ErrNotFound = errors.New("ledger: not found")
	// ErrDuplicateRun: RecordRun was given a run id that is already stored.
	ErrDuplicateRun = errors.New("ledger: run already recorded")
	// ErrSchemaTooNew: the file was migrated by a newer trimline than this one.
	ErrSchemaTooNew = errors.New("ledger: database schema is newer than this program")
	// ErrCorrupt: stored data fails its own check (a record's SHA-256, a migration's name).
	ErrCorrupt = errors.New("ledger: stored data is inconsistent")
	// ErrSequenceExhausted: a certificate prefix has issued all 999999 numbers.
	ErrSequenceExhausted = errors.New("ledger: certificate sequence exhausted")
	// ErrInvalid: an argument or record is not acceptable (empty run id, bad verdict, ...).
	ErrInvalid = errors.New("ledger: invalid argument")
	// ErrVoided: the certificate is voided (VoidCertificate); it cannot be voided
	// again, and no document is issued for it any more.
	ErrVoided = errors.New("ledger: certificate voided")
)

// MaxCertSequence is the highest sequence number a certificate prefix can issue: the
// sequence is written with exactly six digits.
const MaxCertSequence = 999999

// timeLayout is RFC 3339 with nanoseconds, fixed width, for UTC times.
const timeLayout = "2006-01-02T15:04:05.000000000Z"

// busyTimeout is how long a connection waits for another's lock before SQLITE_BUSY.
const busyTimeout = 5 * time.Second

// initRetryWindow is how long Open keeps trying while other processes hold the
// file's lock to create or migrate it.
const initRetryWindow = 30 * time.Second

// Ledger is an open ledger file. Make one with Open. Its methods are safe for
// concurrent use by several goroutines, and several processes (or several Ledgers in
// one process) may have the same file open.
type Ledger struct {
	// Now is the clock for the created_at time of documents (AddSignedDocument) and
	// the time of audit trail entries. Open sets it to time.Now; replace it before
	// the Ledger is used, not while it is in use. Migrations applied by Open (and the
	// audit entries migration 0003 backfills) are stamped with time.Now.
	Now func() time.Time

	db  *sql.DB
	dir string // the absolute folder of the ledger file: stored paths are relative to it
}

// Open opens the ledger at path (a file name; it is created if missing, but its
// directory must exist), configures every connection with busy_timeout 5000 ms,
// journal_mode WAL, foreign_keys on and BEGIN IMMEDIATE transactions, and applies the
// embedded migrations the file does not have yet, each in its own transaction.
// Several processes may Open the same file at once, also one that does not exist
// yet: a start-up step that SQLite refuses with SQLITE_BUSY is retried for up to 5 s.
//
// It fails with ErrSchemaTooNew if the file has a migration newer than this program
// knows, with ErrCorrupt if an applied migration's name differs from the embedded
// one, and if the file system does not allow WAL mode. ctx bounds Open's own work,
// except the migrations: once they begin, they all run to the end even if ctx is
// cancelled, so a ledger is never left between two versions by a cancel.
func Open(ctx context.Context, path string) (*Ledger, error) {
	if path == "" {
		return nil, fmt.Errorf("ledger: open: empty path: %w", ErrInvalid)
	}
	abs, err := filepath.Abs(path)
	if err != nil {
		return nil, fmt.Errorf("ledger: open %s: %w", path, err)
	}
	db, err := sql.Open("sqlite", dsn(abs))
	if err != nil {
		return nil, fmt.Errorf("ledger: open %s: %w", path, err)
	}
	l := &Ledger{Now: time.Now, db: db, dir: filepath.Dir(abs)}
	if err := l.initRetrying(ctx); err != nil {
		db.Close()
		return nil, fmt.Errorf("ledger: open %s: %w", path, err)
	}
	return l, nil
}

// initRetrying runs init, again and again while it fails with SQLITE_BUSY, for up to
// initRetryWindow. When several processes create a new file at the same moment, the
// switch to WAL can fail with SQLITE_BUSY at once, without waiting in SQLite's busy
// handler (SQLite does so when waiting could deadlock); a new attempt a moment later,
// on a new connection, succeeds. The window is longer than one busy timeout because
// a process that opens a ledger while others migrate it waits for every one of
// their migrations in turn, which on a loaded machine can take more than 5 s.
func (l *Ledger) initRetrying(ctx context.Context) error {
	deadline := time.Now().Add(initRetryWindow)
	wait := 2 * time.Millisecond
	for {
		err := l.init(ctx)
		if err == nil || !isBusy(err) || time.Now().After(deadline) {
			return err
		}
		select {
		case <-ctx.Done():
			return ctx.Err()
		case <-time.After(wait + time.Duration(rand.Int64N(int64(wait)))):
		}
		wait = min(2*wait, 100*time.Millisecond)
	}
}

// isBusy reports whether err is SQLite's SQLITE_BUSY or SQLITE_LOCKED (any extended code).
func isBusy(err error) bool {
	var se *sqlite.Error
	if !errors.As(err, &se) {
		return false
	}
	code := se.Code() & 0xff
	return code == sqlite3.SQLITE_BUSY || code == sqlite3.SQLITE_LOCKED
}

// dsn builds the driver's data source name. The path is a SQLite URI path: '%', '?'
// and '#' are percent-escaped.
func dsn(abs string) string {
	p := strings.NewReplacer("%", "%25", "?", "%3f", "#", "%23").Replace(filepath.ToSlash(abs))
	return "file:" + p + fmt.Sprintf("?_pragma=busy_timeout(%d)&_pragma=journal_mode(WAL)&_pragma=foreign_keys(1)&_txlock=immediate",
		busyTimeout.Milliseconds())
}

func (l *Ledger) init(ctx context.Context) error {
	var mode string
	if err := l.db.QueryRowContext(ctx, "PRAGMA journal_mode").Scan(&mode); err != nil {
		return err
	}
	if !strings.EqualFold(mode, "wal") {
		return fmt.Errorf("journal mode is %q, want wal (does the file system support WAL?)", mode)
	}
	// A migration once begun is finished: a cancelled ctx (Ctrl-C during start-up)
	// stops Open before or after the migrations, never between two of them.
	return l.migrate(context.WithoutCancel(ctx))
}

// Close closes the ledger's connections. Calls in progress finish first; the Ledger
// must not be used afterwards.
func (l *Ledger) Close() error {
	return l.db.Close()
}

func (l *Ledger) now() time.Time {
	if l.Now == nil {
		return time.Now()
	}
	return l.Now()
}

// formatTime renders t for storage: UTC, RFC 3339, nine fractional digits.
func formatTime(t time.Time) string {
	return t.UTC().Format(timeLayout)
}

// parseTime reads a time written by formatTime (any RFC 3339 time is accepted).
func parseTime(s string) (time.Time, error) {
	t, err := time.Parse(time.RFC3339Nano, s)
	if err != nil {
		return time.Time{}, fmt.Errorf("%w: time %q: %v", ErrCorrupt, s, err)
	}
	return t.UTC(), nil
}

// realOrNull returns f for a REAL column: NULL unless f is finite.
func realOrNull(f float64) any {
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return nil
	}
	return f
}

// positiveOrNull returns f for a REAL column that is NULL when the value was not
// recorded (zero) or not a finite number.
func positiveOrNull(f float64) any {
	if f == 0 {
		return nil
	}
	return realOrNull(f)
}

// ptrOrNull returns *p for a REAL column: NULL for a nil pointer or a non-finite value.
func ptrOrNull(p *float64) any {
	if p == nil {
		return nil
	}
	return realOrNull(*p)
}

// ambientC is runs.ambient_c: NULL when the record says the ambient temperature was
// not recorded (no source). A temperature of 0 °C with a source is stored as 0.
func ambientC(c sequencer.Conditions) any {
	if c.AmbientSource == "" && c.AmbientC == 0 {
		return nil
	}
	return realOrNull(c.AmbientC)
}

// uncertaintyArgs are the results columns u, dof, k, expanded_u, method. A zero
// Uncertainty (not evaluated) is five NULLs. Otherwise dof is NULL when infinite:
// "u IS NOT NULL AND dof IS NULL" reads as infinitely many degrees of freedom. The
// exact value, +Inf included, is in the record JSON.
func uncertaintyArgs(u sequencer.Uncertainty) []any {
	if u == (sequencer.Uncertainty{}) {
		return []any{nil, nil, nil, nil, nil}
	}
	return []any{realOrNull(u.Std), realOrNull(u.DOF), realOrNull(u.K), realOrNull(u.Expanded), nullText(u.Method)}
}

// decisionArgs are the limit_outcomes columns rule … statement: thirteen NULLs for
// an expression limit (no decision). tur is NULL when the record has 0 (one-sided
// tolerance or U unknown).
func decisionArgs(d *limits.Decision) []any {
	if d == nil {
		return make([]any, 13)
	}
	return []any{d.Rule, realOrNull(d.GuardFactor), realOrNull(d.Guard), ptrOrNull(d.Lower), ptrOrNull(d.Upper),
		ptrOrNull(d.AcceptLower), ptrOrNull(d.AcceptUpper), d.Zone, realOrNull(d.POutside), positiveOrNull(d.TUR),
		d.TURLow, d.Binary, d.Statement}
}

// nullText returns s for a nullable TEXT column: NULL when empty.
func nullText(s string) any {
	if s == "" {
		return nil
	}
	return s
}

func sha256Hex(b []byte) string {
	s := sha256.Sum256(b)
	return hex.EncodeToString(s[:])
}

// RecordRun stores one complete run in one transaction; it is RecordRunWith with
// only a certificate prefix: no file contents, no signature, and the record's
// Operator as the actor of the audit trail entry.
func (l *Ledger) RecordRun(ctx context.Context, rec *sequencer.Record, certPrefix string) (certNumber string, err error) {
	return l.RecordRunWith(ctx, rec, RecordOptions{Prefix: certPrefix})
}

// RecordOptions are RecordRunWith's options besides the record.
type RecordOptions struct {
	// Prefix is the certificate prefix: 1 to 32 characters of A–Z, a–z, 0–9, '.',
	// '_' or '-'. Only PASS, FAIL and REVIEW runs need one.
	Prefix string
	// Files holds the exact content of the files in force, keyed by the lowercase hex
	// SHA-256 of the content. Every entry is checked against its key (a mismatch is
	// ErrInvalid); the content of each file of rec.Files whose SHA256 is a key is
	// stored in the blobs table, once per distinct content however many runs use it.
	// Entries that no file of rec.Files names are checked but not stored.
	Files map[string][]byte
	// Sign, if not nil, signs the run. It is called inside the write transaction,
	// after the certificate number is allocated ("" for a FAULT or ABORTED run),
	// with the run id and the record's SHA-256 (RecordSHA256), and must return the
	// id of the key and a signature over signing.RecordMessage(number, runID, recordSHA256).
	// The key id must be non-empty without control characters and the signature
	// non-empty. An error from Sign (returned wrapped) rolls everything back, the
	// number included. Other writers of the file wait while Sign runs (for at most
	// 5 s before they fail with SQLITE_BUSY), so it must be quick.
	Sign func(number, runID, recordSHA256 string) (keyID string, sig []byte, err error)
	// Actor is who recorded the run, for the audit trail; "" means rec.Operator,
	// and "trimline" if that is empty too.
	Actor string
	// Review, for a record that carries a reviewer's decision on the REVIEW run
	// it retests (rec.Disposition, rec.RetestOf), is the detail of the decision's
	// audit trail entry (ActionReviewAccept or ActionReviewReject; actor: the
	// reviewer; subject: the decided certificate), appended in the same
	// transaction with Certificate, RunID and OfRunID filled in. The decision is
	// refused (ErrInvalid) unless it is a certified retest of a REVIEW run whose
	// certificate is the one decided, with the decision's verdict; and
	// (ErrDecided) when that certificate is no longer current. A record with a
	// decision and no Review, or a Review without a decision, is ErrInvalid.
	Review *ReviewDetail
}

// RecordRunWith stores one complete run in one transaction: the unit (inserted or
// updated: first_seen and last_seen span the Started and Finished times of all its
// runs, product is that of its latest run), the run with its canonical record JSON
// (Canonical) and that JSON's SHA-256, and every reading, result, limit outcome,
// fit, trim code, file and instrument of rec; the contents of the files in force
// given in opt.Files; the run's signature (opt.Sign) and its link in the hash chain
// of its station; and an audit trail entry "create". Either all of it is stored or
// none.
//
// A retest (rec.RetestOf, the run id of an earlier run of the same serial) is
// linked in the column retest_of and the create entry; when the retest gets a
// certificate and the earlier run has one, an audit trail entry "supersede" (subject:
// the earlier certificate) is written in the same transaction, so the serial never
// holds two current certificates (CertificateStatus).
//
// For a PASS, FAIL or REVIEW record (a unit that was measured completely) it
// allocates the next certificate number of opt.Prefix in the same transaction and
// returns it: the prefix + "-" + the sequence written with six digits, starting at 1
// ("TL1-000001"). Numbers have no gaps and no duplicates across goroutines and
// processes, because a transaction that fails takes its number with it. FAULT and
// ABORTED records get no number: RecordRunWith returns "" and ignores the prefix.
//
// The chain link: chain_prev is the chain_hash of the station's (rec.Station's)
// previous run, "" for its first, and chain_hash is the lowercase hex SHA-256 of
//
//	"trimline-chain-v1\n" + chain_prev + "\n" + run_id + "\n" + certificate + "\n" +
//	record_sha256 + "\n" + verdict + "\n" + key_id + "\n" + hex(signature)
//
// (certificate, key_id and hex(signature) "" when absent). It is computed inside
// the write transaction, so runs of one station are chained in the order they were
// stored, whichever process stored them.
//
// Errors (wrapped): ErrInvalid for a nil record, an empty RunID or Serial, a run id
// with control characters, an unknown verdict, a bad prefix, a file whose content
// does not match its key, or a bad key id or signature from Sign; ErrDuplicateRun if
// the run id is already stored; ErrInvalid for a RetestOf that names no stored run
// of rec.Serial; ErrSequenceExhausted after number 999999 of a
// prefix; Sign's error; otherwise database errors, including SQLITE_BUSY if another
// writer holds the file for more than 5 s, and ctx's error if ctx ends first. rec
// and opt.Files are only read.
func (l *Ledger) RecordRunWith(ctx context.Context, rec *sequencer.Record, opt RecordOptions) (certNumber string, err error) {
	if err := validateRecord(rec); err != nil {
		return "", err
	}
	if (rec.Disposition != nil) != (opt.Review != nil) {
		return "", fmt.Errorf("ledger: run %s: a review decision is stored with its audit trail entry (RecordOptions.Review), and only one: %w", rec.RunID, ErrInvalid)
	}
	wantCert := certified(rec.Verdict)
	if wantCert {
		if err := validatePrefix(opt.Prefix); err != nil {
			return "", err
		}
	}
	blobs, err := filesToStore(rec, opt.Files)
	if err != nil {
		return "", err
	}
	doc, err := canonicalJSON(rec)
	if err != nil {
		return "", fmt.Errorf("ledger: run %s: encode record: %w", rec.RunID, err)
	}
	reasons, err := reasonsJSON(rec)
	if err != nil {
		return "", fmt.Errorf("ledger: run %s: encode reasons: %w", rec.RunID, err)
	}
	actor := opt.Actor
	if actor == "" {
		actor = rec.Operator
	}
	if actor == "" {
		actor = systemActor
	}
	in := runInput{rec: rec, doc: doc, recordSHA: sha256Hex(doc), reasonsJSON: reasons,
		wantCert: wantCert, prefix: opt.Prefix, sign: opt.Sign, actor: actor, blobs: blobs, review: opt.Review}

	tx, err := l.db.BeginTx(ctx, nil)
	if err != nil {
		return "", fmt.Errorf("ledger: run %s: begin: %w", rec.RunID, err)
	}
	defer tx.Rollback() // no-op after Commit
	// Stamped once the write lock is held, so the trail's times follow its order.
	in.at = formatTime(l.now())

	cert, err := storeRun(ctx, tx, in)
	if err != nil {
		return "", fmt.Errorf("ledger: run %s: %w", rec.RunID, err)
	}
	if err := tx.Commit(); err != nil {
		return "", fmt.Errorf("ledger: run %s: commit: %w", rec.RunID, err)
	}
	return cert, nil
}

// systemActor is the audit trail's actor when no person can be named.
const systemActor = "trimline"

type blob struct {
	sha  string
	data []byte
}

// filesToStore checks every entry of files against its key and returns the contents
// of the files of rec that files holds, once per distinct SHA-256, in rec.Files order.
func filesToStore(rec *sequencer.Record, files map[string][]byte) ([]blob, error) {
	for key, data := range files {
		if !isSHA256Hex(key) {
			return nil, fmt.Errorf("ledger: run %s: file key %q is not 64 lowercase hex digits: %w", rec.RunID, key, ErrInvalid)
		}
		if got := sha256Hex(data); got != key {
			return nil, fmt.Errorf("ledger: run %s: file content under key %s has SHA-256 %s: %w", rec.RunID, key, got, ErrInvalid)
		}
	}
	var out []blob
	seen := map[string]bool{}
	for _, f := range rec.Files {
		key := strings.ToLower(f.SHA256)
		data, ok := files[key]
		if !ok || seen[key] {
			continue
		}
		seen[key] = true
		out = append(out, blob{key, data})
	}
	return out, nil
}

// isSHA256Hex reports whether s is 64 lowercase hex digits.
func isSHA256Hex(s string) bool {
	if len(s) != 2*sha256.Size {
		return false
	}
	for i := range len(s) {
		if c := s[i]; !(c >= '0' && c <= '9' || c >= 'a' && c <= 'f') {
			return false
		}
	}
	return true
}

// hasControl reports whether s has a control character (a line break would make
// the chain line and the signed message ambiguous).
func hasControl(s string) bool {
	return strings.ContainsFunc(s, unicode.IsControl)
}

func validateRecord(rec *sequencer.Record) error {
	switch {
	case rec == nil:
		return fmt.Errorf("ledger: nil record: %w", ErrInvalid)
	case rec.RunID == "":
		return fmt.Errorf("ledger: record has no run id: %w", ErrInvalid)
	case hasControl(rec.RunID):
		return fmt.Errorf("ledger: run id %q has control characters: %w", rec.RunID, ErrInvalid)
	case rec.Serial == "":
		return fmt.Errorf("ledger: run %s has no serial: %w", rec.RunID, ErrInvalid)
	}
	switch rec.Verdict {
	case sequencer.Pass, sequencer.Fail, sequencer.Review, sequencer.Fault, sequencer.Aborted:
	default:
		return fmt.Errorf("ledger: run %s: unknown verdict %q: %w", rec.RunID, rec.Verdict, ErrInvalid)
	}
	return nil
}

// certified reports whether a run of verdict v gets a certificate number: PASS, FAIL
// and REVIEW runs were measured completely; FAULT and ABORTED runs were not.
func certified(v sequencer.Verdict) bool {
	return v == sequencer.Pass || v == sequencer.Fail || v == sequencer.Review
}

func validatePrefix(p string) error {
	if len(p) == 0 || len(p) > 32 {
		return fmt.Errorf("ledger: certificate prefix %q must be 1 to 32 characters: %w", p, ErrInvalid)
	}
	for _, c := range p {
		ok := c >= 'A' && c <= 'Z' || c >= 'a' && c <= 'z' || c >= '0' && c <= '9' || c == '.' || c == '_' || c == '-'
		if !ok {
			return fmt.Errorf("ledger: certificate prefix %q: character %q not allowed: %w", p, c, ErrInvalid)
		}
	}
	return nil
}

// validateSignature checks a key id and signature pair as it is stored: both
// empty (unsigned) or a key id without control characters and a non-empty signature.
func validateSignature(keyID string, sig []byte) error {
	switch {
	case keyID == "" && len(sig) == 0:
		return nil
	case keyID == "":
		return fmt.Errorf("signature without a key id: %w", ErrInvalid)
	case hasControl(keyID):
		return fmt.Errorf("key id %q has control characters: %w", keyID, ErrInvalid)
	case len(sig) == 0:
		return fmt.Errorf("key id %q without a signature: %w", keyID, ErrInvalid)
	}
	return nil
}

// runInput is what storeRun stores.
type runInput struct {
	rec         *sequencer.Record
	doc         []byte // canonical JSON of rec
	recordSHA   string // sha256Hex(doc)
	reasonsJSON string
	wantCert    bool
	prefix      string
	sign        func(number, runID, recordSHA256 string) (string, []byte, error)
	actor       string
	review      *ReviewDetail
	blobs       []blob
	at          string // audit trail time
}

func storeRun(ctx context.Context, tx *sql.Tx, in runInput) (string, error) {
	rec := in.rec
	var exists int
	switch err := tx.QueryRowContext(ctx, `SELECT 1 FROM runs WHERE run_id = ?`, rec.RunID).Scan(&exists); {
	case err == nil:
		return "", ErrDuplicateRun
	case !errors.Is(err, sql.ErrNoRows):
		return "", err
	}

	// A retest names an earlier run of the same serial; its certificate, if any,
	// is superseded below when this run is certified.
	var earlierCert string
	if rec.RetestOf != "" {
		var serial string
		var cert sql.NullString
		switch err := tx.QueryRowContext(ctx, `SELECT serial, certificate FROM runs WHERE run_id = ?`, rec.RetestOf).Scan(&serial, &cert); {
		case errors.Is(err, sql.ErrNoRows):
			return "", fmt.Errorf("retest of run %s, which is not in the ledger: %w", rec.RetestOf, ErrInvalid)
		case err != nil:
			return "", fmt.Errorf("retest of run %s: %w", rec.RetestOf, err)
		case serial != rec.Serial:
			return "", fmt.Errorf("retest of run %s, which tested serial %s, not %s: %w", rec.RetestOf, serial, rec.Serial, ErrInvalid)
		}
		earlierCert = cert.String
	}

	if err := storeUnit(ctx, tx, rec); err != nil {
		return "", err
	}

	var cert string
	if in.wantCert {
		var n int64
		if err := tx.QueryRowContext(ctx, `
			INSERT INTO cert_sequences (prefix, last) VALUES (?, 1)
			ON CONFLICT (prefix) DO UPDATE SET last = last + 1
			RETURNING last`, in.prefix).Scan(&n); err != nil {
			return "", fmt.Errorf("certificate number for %s: %w", in.prefix, err)
		}
		if n > MaxCertSequence {
			return "", fmt.Errorf("prefix %s: %w", in.prefix, ErrSequenceExhausted)
		}
		cert = fmt.Sprintf("%s-%06d", in.prefix, n)
	}

	keyID, sig := "", []byte{}
	if in.sign != nil {
		k, s, err := in.sign(cert, rec.RunID, in.recordSHA)
		if err != nil {
			return "", fmt.Errorf("sign: %w", err)
		}
		if k == "" && len(s) == 0 {
			return "", fmt.Errorf("sign: no key id and no signature: %w", ErrInvalid)
		}
		if err := validateSignature(k, s); err != nil {
			return "", fmt.Errorf("sign: %w", err)
		}
		keyID, sig = k, s
	}

	seq, prev, err := chainTail(ctx, tx, rec.Station)
	if err != nil {
		return "", err
	}
	link := chainHash(prev, rec.RunID, cert, in.recordSHA, string(rec.Verdict), keyID, sig)

	// The columns that repeat the record come from runColumnValues, which
	// VerifyChain checks them against.
	cols := append(slices.Clone(runColumns), "certificate", "record_json", "record_sha256", "key_id", "signature", "chain_seq", "chain_prev", "chain_hash")
	args := append(runColumnValues(rec, in.reasonsJSON), nullText(cert), string(in.doc), in.recordSHA, keyID, sig, seq+1, prev, link)
	if _, err := tx.ExecContext(ctx, `INSERT INTO runs (`+strings.Join(cols, ", ")+`) VALUES (?`+strings.Repeat(", ?", len(cols)-1)+`)`,
		args...); err != nil {
		return "", fmt.Errorf("run row: %w", err)
	}

	if err := storeRows(ctx, tx, rec); err != nil {
		return "", err
	}
	var blobSHAs []string
	for _, b := range in.blobs {
		if _, err := tx.ExecContext(ctx, `INSERT INTO blobs (sha256, size, data) VALUES (?, ?, ?) ON CONFLICT (sha256) DO NOTHING`,
			b.sha, len(b.data), nonNilBytes(b.data)); err != nil {
			return "", fmt.Errorf("blob %s: %w", b.sha, err)
		}
		blobSHAs = append(blobSHAs, b.sha)
	}
	detail, err := json.Marshal(createDetail{Station: rec.Station, Serial: rec.Serial, Operator: rec.Operator,
		Verdict: string(rec.Verdict), Certificate: cert, RecordSHA256: in.recordSHA, KeyID: keyID,
		ChainSeq: seq + 1, ChainHash: link, Blobs: blobSHAs, RetestOf: rec.RetestOf})
	if err != nil {
		return "", err
	}
	if _, err := appendAudit(ctx, tx, in.at, in.actor, ActionCreate, rec.RunID, string(detail)); err != nil {
		return "", err
	}
	if in.review != nil {
		if err := storeReview(ctx, tx, in.at, rec, cert, earlierCert, *in.review); err != nil {
			return "", err
		}
	}
	if cert != "" && earlierCert != "" {
		if err := supersede(ctx, tx, in.at, in.actor, earlierCert, rec.RetestOf, rec.RunID, cert); err != nil {
			return "", err
		}
	}
	return cert, nil
}

// supersede appends the audit trail entry that supersedes certificate old (of run
// oldRun) by certificate by (of the retest byRun), unless old is superseded already.
func supersede(ctx context.Context, tx *sql.Tx, at, actor, old, oldRun, byRun, by string) error {
	if _, done, err := firstEntry(ctx, tx, old, ActionSupersede); err != nil || done {
		return err
	}
	detail, err := json.Marshal(supersedeDetail{RunID: oldRun, ByRunID: byRun, ByCertificate: by})
	if err != nil {
		return err
	}
	if _, err := appendAudit(ctx, tx, at, actor, ActionSupersede, old, string(detail)); err != nil {
		return fmt.Errorf("supersede %s: %w", old, err)
	}
	return nil
}

// chainTail returns the chain_seq and chain_hash of the last run of station: 0 and
// "" when the station has none.
func chainTail(ctx context.Context, tx *sql.Tx, station string) (int64, string, error) {
	var seq int64
	var hash string
	err := tx.QueryRowContext(ctx, `SELECT chain_seq, chain_hash FROM runs WHERE station = ? ORDER BY chain_seq DESC LIMIT 1`, station).Scan(&seq, &hash)
	if errors.Is(err, sql.ErrNoRows) {
		return 0, "", nil
	}
	if err != nil {
		return 0, "", fmt.Errorf("chain of station %q: %w", station, err)
	}
	return seq, hash, nil
}

// nonNilBytes returns b, or an empty slice for nil: the driver stores a nil []byte as NULL.
func nonNilBytes(b []byte) []byte {
	if b == nil {
		return []byte{}
	}
	return b
}

// AddDocument records an unsigned document issued for a run; it is
// AddSignedDocument without a key id and signature.
func (l *Ledger) AddDocument(ctx context.Context, runID, number, path string, sha256hex string, size int64) error {
	return l.AddSignedDocument(ctx, Document{RunID: runID, Number: number, Path: path, SHA256: sha256hex, Size: size})
}

// Run returns the record of run runID exactly as RecordRun was given it, decoded from
// the stored canonical JSON after checking that JSON against its stored SHA-256.
// Times come back with the instant and offset they had, but not their time.Location
// name or monotonic reading (compare them with time.Time.Equal); what JSON cannot
// tell apart comes back as JSON decodes it (an empty but non-nil Reasons, which is
// omitted, comes back nil; every NaN is math.NaN()).
//
// Errors (wrapped): ErrNotFound for an unknown run id; ErrCorrupt if the JSON does
// not match its hash or cannot be decoded.
func (l *Ledger) Run(ctx context.Context, runID string) (*sequencer.Record, error) {
	var doc []byte
	var sum string
	err := l.db.QueryRowContext(ctx, `SELECT record_json, record_sha256 FROM runs WHERE run_id = ?`, runID).Scan(&doc, &sum)
	if errors.Is(err, sql.ErrNoRows) {
		return nil, fmt.Errorf("ledger: run %s: %w", runID, ErrNotFound)
	}
	if err != nil {
		return nil, fmt.Errorf("ledger: run %s: %w", runID, err)
	}
	rec, err := decodeRecord(runID, doc, sum)
	if err != nil {
		return nil, fmt.Errorf("ledger: %w", err)
	}
	return rec, nil
}

// RunSummary is one run as Runs lists it. Certificate is "" for a run without one;
// Started and Finished are in UTC.
type RunSummary struct {
	RunID, Serial, Product, Revision, Station string
	Verdict                                   sequencer.Verdict
	Certificate                               string
	Started, Finished                         time.Time
}

// Runs lists the stored runs, newest first (by Started, then by run id descending),
// only those of serial unless serial is "". It returns an empty slice when there are
// none.
func (l *Ledger) Runs(ctx context.Context, serial string) ([]RunSummary, error) {
	return l.runs(ctx, serial, 0)
}

// RecentRuns is Runs of every serial, at most n of the newest (n ≤ 0: all).
func (l *Ledger) RecentRuns(ctx context.Context, n int) ([]RunSummary, error) {
	return l.runs(ctx, "", n)
}

// LastMeasuredRun returns the newest stored run of serial that measured the unit
// completely (PASS, FAIL or REVIEW; FAULT and ABORTED runs do not count), among the
// engineering runs when engineering is true and among the production runs
// otherwise (Record.Engineering); ok is false when there is none. "Newest" is the
// order runs were stored in.
func (l *Ledger) LastMeasuredRun(ctx context.Context, serial string, engineering bool) (s RunSummary, ok bool, err error) {
	eng := 0
	if engineering {
		eng = 1
	}
	rows, err := l.db.QueryContext(ctx, `SELECT `+runSummaryColumns+` FROM runs
		WHERE serial = ? AND verdict IN ('PASS', 'FAIL', 'REVIEW') AND coalesce(json_extract(record_json, '$.engineering'), 0) = ?
		ORDER BY rowid DESC LIMIT 1`, serial, eng)
	out, err := collect(rows, err, scanRunSummary)
	if err != nil {
		return RunSummary{}, false, fmt.Errorf("ledger: runs of %s: %w", serial, err)
	}
	if len(out) == 0 {
		return RunSummary{}, false, nil
	}
	return out[0], true, nil
}

const runSummaryColumns = `run_id, serial, product, revision, station, verdict, certificate, started, finished`

func scanRunSummary(r scanner) (RunSummary, error) {
	var s RunSummary
	var verdict, started, finished string
	var cert sql.NullString
	if err := r.Scan(&s.RunID, &s.Serial, &s.Product, &s.Revision, &s.Station, &verdict, &cert, &started, &finished); err != nil {
		return s, err
	}
	s.Verdict = sequencer.Verdict(verdict)
	s.Certificate = cert.String
	var err error
	if s.Started, err = parseTime(started); err != nil {
		return s, fmt.Errorf("run %s: %w", s.RunID, err)
	}
	if s.Finished, err = parseTime(finished); err != nil {
		return s, fmt.Errorf("run %s: %w", s.RunID, err)
	}
	return s, nil
}

func (l *Ledger) runs(ctx context.Context, serial string, limit int) ([]RunSummary, error) {
	q := `SELECT ` + runSummaryColumns + ` FROM runs`
	var args []any
	if serial != "" {
		q += ` WHERE serial = ?`
		args = append(args, serial)
	}
	q += ` ORDER BY started DESC, run_id DESC`
	if limit > 0 {
		q += ` LIMIT ?`
		args = append(args, limit)
	}
	rows, err := l.db.QueryContext(ctx, q, args...)
	out, err := collect(rows, err, scanRunSummary)
	if err != nil {
		return nil, fmt.Errorf("ledger: runs: %w", err)
	}
	return out, nil
}

// countedTables are the tables Counts reports, in its map's keys.
var countedTables = []string{
	"units", "runs", "readings", "results", "limit_outcomes", "documents",
	"fits", "trims", "files", "instruments", "blobs", "audit_trail",
}

// Counts returns the number of rows in each of units, runs, readings, results,
// limit_outcomes and documents, and also fits, trims, files, instruments, blobs and
// audit_trail, keyed by table name. All counts are read by one statement, so they are consistent with each
// other.
func (l *Ledger) Counts(ctx context.Context) (map[string]int, error) {
	sel := make([]string, len(countedTables))
	for i, t := range countedTables {
		sel[i] = "(SELECT count(*) FROM " + t + ")"
	}
	n := make([]int, len(countedTables))
	dest := make([]any, len(n))
	for i := range n {
		dest[i] = &n[i]
	}
	if err := l.db.QueryRowContext(ctx, "SELECT "+strings.Join(sel, ", ")).Scan(dest...); err != nil {
		return nil, fmt.Errorf("ledger: counts: %w", err)
	}
	out := make(map[string]int, len(countedTables))
	for i, t := range countedTables {
		out[t] = n[i]
	}
	return out, nil
}
