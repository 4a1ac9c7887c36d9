package ledger

import (
	"context"
	"database/sql"
	"encoding/json"
	"errors"
	"fmt"
	"strconv"
	"strings"
	"time"
)

// The audit trail (21 CFR 11.10(e)): a secure, computer-generated, time-stamped
// record of who created a run, issued a document or voided a certificate, and of
// what other parts report through Audit. Entries are only appended (triggers refuse
// UPDATE and DELETE) and are hash-chained, so a change does not obscure an earlier
// entry, and a changed or removed entry shows in VerifyChain.
//
// An entry's hash is the lowercase hex SHA-256 of
//
//	"trimline-audit-v1\n" + prev_hash + "\n" + seq + "\n" + at + "\n" +
//	len(actor) + ":" + actor + "\n" + len(action) + ":" + action + "\n" +
//	len(subject) + ":" + subject + "\n" + len(detail) + ":" + detail + "\n"
//
// with seq and the lengths (in bytes) in decimal, at as stored (RFC 3339 UTC with
// nine fractional digits) and prev_hash the hash of entry seq − 1 ("" for entry 1).
// The length prefixes keep the free-text fields apart whatever they contain.

// Actions the ledger writes itself. Audit refuses them, so that an entry with one of
// them always comes from the ledger's own method.
const (
	ActionCreate = "create" // RecordRunWith: subject is the run id
	ActionIssue  = "issue"  // AddSignedDocument: subject is the certificate number
	ActionVoid   = "void"   // VoidCertificate: subject is the certificate number
	// ActionSupersede: RecordRunWith, for a certified retest of a certified run;
	// subject is the superseded (older) certificate number.
	ActionSupersede = "supersede"
)

// AuditEntry is one entry of the audit trail.
type AuditEntry struct {
	Seq      int64     // 1, 2, 3, ... in the order written
	At       time.Time // when, UTC
	Actor    string    // who
	Action   string    // what: "create", "issue", "void" or another part's word
	Subject  string    // which record: a run id (create) or certificate number (issue, void)
	Detail   string    // a JSON object for create, issue and void; free text otherwise
	PrevHash string    // Hash of entry Seq − 1, "" for the first
	Hash     string
}

// createDetail is the detail of a "create" entry: the run's identity and its link,
// so the trail anchors every run's chain hash.
type createDetail struct {
	Station      string   `json:"station"`
	Serial       string   `json:"serial"`
	Operator     string   `json:"operator"`
	Verdict      string   `json:"verdict"`
	Certificate  string   `json:"certificate,omitempty"`
	RecordSHA256 string   `json:"record_sha256"`
	KeyID        string   `json:"key_id,omitempty"`
	ChainSeq     int64    `json:"chain_seq"`
	ChainHash    string   `json:"chain_hash"`
	Blobs        []string `json:"blobs,omitempty"` // SHA-256 of the file contents stored with the run
	Note         string   `json:"note,omitempty"`
	RetestOf     string   `json:"retest_of,omitempty"` // the earlier run a retest repeats`
}

// issueDetail is the detail of an "issue" entry: everything of the document row.
type issueDetail struct {
	RunID     string `json:"run_id"`
	Path      string `json:"path"`
	SHA256    string `json:"sha256"`
	Size      int64  `json:"size"`
	KeyID     string `json:"key_id,omitempty"`
	Signature string `json:"signature,omitempty"` // hex
	CreatedAt string `json:"created_at"`
	Note      string `json:"note,omitempty"`
}

// supersedeDetail is the detail of a "supersede" entry: the run whose certificate
// (the entry's subject) is superseded, and the retest and certificate that
// supersede it.
type supersedeDetail struct {
	RunID         string `json:"run_id"`
	ByRunID       string `json:"by_run_id"`
	ByCertificate string `json:"by_certificate"`
}

// voidDetail is the detail of a "void" entry. A signed void also carries the time
// it was signed at (as signed, RFC 3339 with nanoseconds, UTC), the signing key's
// id and the base64 signature; a void recorded before voids were signed has none.
type voidDetail struct {
	RunID     string `json:"run_id"`
	Reason    string `json:"reason"`
	SignedAt  string `json:"signed_at,omitempty"`
	KeyID     string `json:"key_id,omitempty"`
	Signature string `json:"signature,omitempty"`
}

// VoidSignature is an approver's signature over a void (signing.VoidMessage of
// the certificate number, the actor, the reason and At). KeyID "" is an unsigned
// void.
type VoidSignature struct {
	At        time.Time // when it was signed; UTC, to the nanosecond
	KeyID     string
	Signature string // base64 (standard encoding) Ed25519 signature
}

// auditHash is an entry's hash, as described at the top of this file.
func auditHash(prev string, seq int64, at, actor, action, subject, detail string) string {
	var b strings.Builder
	b.WriteString("trimline-audit-v1\n")
	b.WriteString(prev)
	b.WriteByte('\n')
	b.WriteString(strconv.FormatInt(seq, 10))
	b.WriteByte('\n')
	b.WriteString(at)
	b.WriteByte('\n')
	for _, f := range []string{actor, action, subject, detail} {
		b.WriteString(strconv.Itoa(len(f)))
		b.WriteByte(':')
		b.WriteString(f)
		b.WriteByte('\n')
	}
	return sha256Hex([]byte(b.String()))
}

// appendAudit appends an entry to the trail inside tx (a write transaction, so the
// read of the last entry and the insert are not interleaved with another writer's).
func appendAudit(ctx context.Context, tx *sql.Tx, at, actor, action, subject, detail string) (int64, error) {
	var seq int64
	var prev string
	err := tx.QueryRowContext(ctx, `SELECT seq, hash FROM audit_trail ORDER BY seq DESC LIMIT 1`).Scan(&seq, &prev)
	if errors.Is(err, sql.ErrNoRows) {
		seq, prev, err = 0, "", nil
	}
	if err != nil {
		return 0, fmt.Errorf("audit trail: %w", err)
	}
	seq++
	if _, err := tx.ExecContext(ctx, `
		INSERT INTO audit_trail (seq, at, actor, action, subject, detail, prev_hash, hash) VALUES (?, ?, ?, ?, ?, ?, ?, ?)`,
		seq, at, actor, action, subject, detail, prev, auditHash(prev, seq, at, actor, action, subject, detail)); err != nil {
		return 0, fmt.Errorf("audit trail: %w", err)
	}
	return seq, nil
}

// Audit appends an entry to the audit trail for another part of trimline (a limit
// file released, a key rotated, a user signed in, ...): who (actor), what (action),
// on which record (subject) and any detail, stamped with l.Now(). Errors (wrapped):
// ErrInvalid for an empty actor or action, or one of the ledger's own actions
// (create, issue, void, supersede, review accept, review reject), which only its
// methods write.
func (l *Ledger) Audit(ctx context.Context, actor, action, subject, detail string) error {
	switch action {
	case "":
		return fmt.Errorf("ledger: audit: empty action: %w", ErrInvalid)
	case ActionCreate, ActionIssue, ActionVoid, ActionSupersede, ActionReviewAccept, ActionReviewReject:
		return fmt.Errorf("ledger: audit: action %q is the ledger's own: %w", action, ErrInvalid)
	}
	if actor == "" {
		return fmt.Errorf("ledger: audit %s: empty actor: %w", action, ErrInvalid)
	}
	err := l.inTx(ctx, func(tx *sql.Tx) error {
		at := formatTime(l.now()) // with the write lock held: the trail's times follow its order
		_, err := appendAudit(ctx, tx, at, actor, action, subject, detail)
		return err
	})
	if err != nil {
		return fmt.Errorf("ledger: audit %s %s: %w", action, subject, err)
	}
	return nil
}

// AuditTrail returns the whole audit trail in order (by Seq). It does not check the
// hashes; VerifyChain does.
func (l *Ledger) AuditTrail(ctx context.Context) ([]AuditEntry, error) {
	rows, err := l.db.QueryContext(ctx, `SELECT seq, at, actor, action, subject, detail, prev_hash, hash FROM audit_trail ORDER BY seq`)
	var badSeq int64 // the entry whose time does not parse, if one does not
	out, err := collect(rows, err, func(r scanner) (AuditEntry, error) {
		var e AuditEntry
		var at string
		if err := r.Scan(&e.Seq, &at, &e.Actor, &e.Action, &e.Subject, &e.Detail, &e.PrevHash, &e.Hash); err != nil {
			return e, err
		}
		var err error
		if e.At, err = parseTime(at); err != nil {
			badSeq = e.Seq
		}
		return e, err
	})
	switch {
	case err != nil && badSeq != 0:
		return nil, fmt.Errorf("ledger: audit trail entry %d: %w", badSeq, err)
	case err != nil:
		return nil, fmt.Errorf("ledger: audit trail: %w", err)
	}
	return out, nil
}

// VoidCertificate voids certificate number: actor (who) says why (reason). The
// certificate and its run stay as they are; the void is an audit trail entry, from
// which CertificateStatus derives the status. A voided certificate gets no further
// documents and is not listed by MissingDocuments.
//
// Errors (wrapped): ErrInvalid for an empty actor or reason; ErrNotFound for a
// number no run has; ErrVoided if it is voided already.
//
// The void is unsigned: it names nobody an auditor can hold to it. SignedVoid
// records one signed by an approver.
func (l *Ledger) VoidCertificate(ctx context.Context, number, actor, reason string) error {
	return l.SignedVoid(ctx, number, actor, reason, VoidSignature{})
}

// SignedVoid is VoidCertificate with the approver's signature sig, which is
// stored with the entry as given (the caller checked it; CertificateStatus
// returns it for an auditor to check again). Errors as for VoidCertificate, and
// ErrInvalid for a signature without its time.
func (l *Ledger) SignedVoid(ctx context.Context, number, actor, reason string, sig VoidSignature) error {
	if sig.KeyID != "" && sig.At.IsZero() {
		return fmt.Errorf("ledger: void %s: a signature without its time: %w", number, ErrInvalid)
	}
	if actor == "" {
		return fmt.Errorf("ledger: void %s: empty actor: %w", number, ErrInvalid)
	}
	if strings.TrimSpace(reason) == "" {
		return fmt.Errorf("ledger: void %s: a reason is required: %w", number, ErrInvalid)
	}
	err := l.inTx(ctx, func(tx *sql.Tx) error {
		at := formatTime(l.now()) // with the write lock held: the trail's times follow its order
		runID, err := runOfCertificate(ctx, tx, number)
		if err != nil {
			return err
		}
		if _, voided, err := voidEntry(ctx, tx, number); err != nil {
			return err
		} else if voided {
			return ErrVoided
		}
		d := voidDetail{RunID: runID, Reason: reason}
		if sig.KeyID != "" {
			d.SignedAt, d.KeyID, d.Signature = sig.At.UTC().Format(time.RFC3339Nano), sig.KeyID, sig.Signature
		}
		detail, err := json.Marshal(d)
		if err != nil {
			return err
		}
		_, err = appendAudit(ctx, tx, at, actor, ActionVoid, number, string(detail))
		return err
	})
	if err != nil {
		return fmt.Errorf("ledger: void %s: %w", number, err)
	}
	return nil
}

// Status is a certificate's status, as the audit trail has it. A certificate is
// current when it is neither voided nor superseded.
type Status struct {
	Number, RunID string
	Voided        bool
	VoidReason    string    // "" unless Voided
	VoidedBy      string    // the actor of the void entry
	VoidedAt      time.Time // UTC; zero unless Voided
	// VoidSignature is the approver's signature of the void; KeyID "" for an
	// unsigned void (one recorded before voids were signed).
	VoidSignature VoidSignature
	// Superseded: a certified retest of the same serial replaced the certificate;
	// SupersededBy is the retest's certificate number, SupersededByRun its run id.
	Superseded      bool
	SupersededBy    string
	SupersededByRun string
	SupersededAt    time.Time // UTC; zero unless Superseded
}

// Current reports whether the certificate is neither voided nor superseded.
func (s Status) Current() bool { return !s.Voided && !s.Superseded }

// CertificateStatus returns the status of certificate number. ErrNotFound (wrapped)
// for a number no run has.
func (l *Ledger) CertificateStatus(ctx context.Context, number string) (Status, error) {
	var st Status
	err := l.readTx(ctx, func(tx *sql.Tx) error {
		runID, err := runOfCertificate(ctx, tx, number)
		if err != nil {
			return err
		}
		st = Status{Number: number, RunID: runID}
		if e, ok, err := firstEntry(ctx, tx, number, ActionSupersede); err != nil {
			return err
		} else if ok {
			var d supersedeDetail
			if err := json.Unmarshal([]byte(e.Detail), &d); err != nil {
				return fmt.Errorf("audit trail entry %d: detail: %v: %w", e.Seq, err, ErrCorrupt)
			}
			st.Superseded, st.SupersededBy, st.SupersededByRun, st.SupersededAt = true, d.ByCertificate, d.ByRunID, e.At
		}
		e, voided, err := voidEntry(ctx, tx, number)
		if err != nil || !voided {
			return err
		}
		var d voidDetail
		if err := json.Unmarshal([]byte(e.Detail), &d); err != nil {
			return fmt.Errorf("audit trail entry %d: detail: %v: %w", e.Seq, err, ErrCorrupt)
		}
		st.Voided, st.VoidReason, st.VoidedBy, st.VoidedAt = true, d.Reason, e.Actor, e.At
		if d.KeyID != "" {
			at, _ := time.Parse(time.RFC3339Nano, d.SignedAt) // a time that does not parse: the signature does not verify
			st.VoidSignature = VoidSignature{At: at.UTC(), KeyID: d.KeyID, Signature: d.Signature}
		}
		return nil
	})
	if err != nil {
		return Status{}, fmt.Errorf("ledger: certificate %s: %w", number, err)
	}
	return st, nil
}

// runOfCertificate returns the run id of certificate number, ErrNotFound if none.
func runOfCertificate(ctx context.Context, q querier, number string) (string, error) {
	var runID string
	err := q.QueryRowContext(ctx, `SELECT run_id FROM runs WHERE certificate = ?`, number).Scan(&runID)
	if errors.Is(err, sql.ErrNoRows) {
		return "", fmt.Errorf("no run has this certificate: %w", ErrNotFound)
	}
	return runID, err
}

// voidEntry returns the first void entry of certificate number, if any.
func voidEntry(ctx context.Context, q querier, number string) (AuditEntry, bool, error) {
	return firstEntry(ctx, q, number, ActionVoid)
}

// firstEntry returns the first audit trail entry of action about subject, if any.
func firstEntry(ctx context.Context, q querier, subject, action string) (AuditEntry, bool, error) {
	e := AuditEntry{Subject: subject, Action: action}
	var at string
	err := q.QueryRowContext(ctx, `
		SELECT seq, at, actor, detail, prev_hash, hash FROM audit_trail WHERE subject = ? AND action = ? ORDER BY seq LIMIT 1`,
		subject, action).Scan(&e.Seq, &at, &e.Actor, &e.Detail, &e.PrevHash, &e.Hash)
	if errors.Is(err, sql.ErrNoRows) {
		return AuditEntry{}, false, nil
	}
	if err != nil {
		return AuditEntry{}, false, err
	}
	if e.At, err = parseTime(at); err != nil {
		return AuditEntry{}, false, err
	}
	return e, true, nil
}

// querier is what *sql.DB and *sql.Tx have in common that the readers need.
type querier interface {
	QueryRowContext(ctx context.Context, query string, args ...any) *sql.Row
	QueryContext(ctx context.Context, query string, args ...any) (*sql.Rows, error)
}

// readTx runs f in a transaction that only reads, so that its queries see one
// snapshot. (With _txlock=immediate every BeginTx takes the write lock; a read-only
// transaction does not.)
func (l *Ledger) readTx(ctx context.Context, f func(tx *sql.Tx) error) error {
	return runTx(ctx, l.db, &sql.TxOptions{ReadOnly: true}, f)
}
