package ledger

import (
	"context"
	"database/sql"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"strings"
	"time"

	"trimline/sequencer"
)

// Document is one document (a certificate PDF) issued for a run.
type Document struct {
	RunID  string
	Number string // the run's certificate number, which the document carries
	// Path is where it was written. AddSignedDocument stores it relative to the
	// ledger's folder (Dir) when it lies inside it, absolute otherwise;
	// DocumentsFor and DocumentBySHA return it resolved (Locate): a path on this
	// machine, whatever the working folder.
	Path   string
	SHA256 string // lowercase hex SHA-256 of its exact bytes
	Size   int64  // bytes
	// KeyID and Signature are the document's signature as its issuer made it (the
	// ledger stores them; what the signature covers is the issuer's convention).
	// Both empty for an unsigned document.
	KeyID     string
	Signature []byte
	// CreatedAt is when the ledger recorded it (l.Now()), UTC. AddSignedDocument
	// ignores it.
	CreatedAt time.Time
}

// AddSignedDocument records a document issued for a run: the certificate number it
// carries, the path it was written to (absolute or relative to the working folder;
// stored relative to the ledger's folder when it lies inside it), the SHA-256 of its exact bytes (64 hex digits,
// stored in lower case), its size in bytes and its signature (key id and signature
// bytes, or both empty), stamped with l.Now() as created_at, and an audit trail entry
// "issue" (actor: the run's operator, or "trimline") with all of it, in one
// transaction. A run may have several documents (a re-issued PDF is a new row; none
// is replaced).
//
// d.Number must be the certificate number RecordRun allocated for the run, so a
// document can only be recorded for a PASS, FAIL or REVIEW run. Errors (wrapped):
// ErrNotFound for an unknown run; ErrVoided for a voided certificate; ErrInvalid for
// an empty path, a malformed hash, a negative size, a bad key id / signature pair, a
// run without a certificate or a number that is not the run's.
func (l *Ledger) AddSignedDocument(ctx context.Context, d Document) error {
	runID := d.RunID
	sum := strings.ToLower(d.SHA256)
	if !isSHA256Hex(sum) {
		return fmt.Errorf("ledger: document for run %s: sha256 %q is not 64 hex digits: %w", runID, d.SHA256, ErrInvalid)
	}
	if d.Path == "" {
		return fmt.Errorf("ledger: document for run %s: empty path: %w", runID, ErrInvalid)
	}
	if d.Size < 0 {
		return fmt.Errorf("ledger: document for run %s: negative size %d: %w", runID, d.Size, ErrInvalid)
	}
	if err := validateSignature(d.KeyID, d.Signature); err != nil {
		return fmt.Errorf("ledger: document for run %s: %w", runID, err)
	}
	d.Path = l.storedPath(d.Path)
	err := l.inTx(ctx, func(tx *sql.Tx) error {
		created := formatTime(l.now()) // with the write lock held: the trail's times follow its order
		var cert sql.NullString
		var operator string
		switch err := tx.QueryRowContext(ctx, `SELECT certificate, operator FROM runs WHERE run_id = ?`, runID).Scan(&cert, &operator); {
		case errors.Is(err, sql.ErrNoRows):
			return ErrNotFound
		case err != nil:
			return err
		}
		if !cert.Valid {
			return fmt.Errorf("the run has no certificate number: %w", ErrInvalid)
		}
		if d.Number != cert.String {
			return fmt.Errorf("number %q is not the run's certificate %q: %w", d.Number, cert.String, ErrInvalid)
		}
		if _, voided, err := voidEntry(ctx, tx, d.Number); err != nil {
			return err
		} else if voided {
			return fmt.Errorf("%s: %w", d.Number, ErrVoided)
		}
		if _, err := tx.ExecContext(ctx, `
			INSERT INTO documents (run_id, number, path, sha256, size, created_at, key_id, signature) VALUES (?, ?, ?, ?, ?, ?, ?, ?)`,
			runID, d.Number, d.Path, sum, d.Size, created, d.KeyID, nonNilBytes(d.Signature)); err != nil {
			return err
		}
		detail, err := json.Marshal(issueDetail{RunID: runID, Path: d.Path, SHA256: sum, Size: d.Size,
			KeyID: d.KeyID, Signature: hex.EncodeToString(d.Signature), CreatedAt: created})
		if err != nil {
			return err
		}
		actor := operator
		if actor == "" {
			actor = systemActor
		}
		_, err = appendAudit(ctx, tx, created, actor, ActionIssue, d.Number, string(detail))
		return err
	})
	if err != nil {
		return fmt.Errorf("ledger: document for run %s: %w", runID, err)
	}
	return nil
}

const documentColumns = `run_id, number, path, sha256, size, created_at, key_id, signature`

func scanDocument(s scanner) (Document, error) {
	var d Document
	var created string
	if err := s.Scan(&d.RunID, &d.Number, &d.Path, &d.SHA256, &d.Size, &created, &d.KeyID, &d.Signature); err != nil {
		return Document{}, err
	}
	if err := stamped(created, &d.CreatedAt, &d.Signature); err != nil {
		return Document{}, err
	}
	return d, nil
}

// DocumentBySHA returns the document whose bytes have SHA-256 sha (hex, either
// case): the first recorded, if a re-issue had identical bytes, with its Path
// resolved (Locate). ErrNotFound
// (wrapped) if there is none, ErrInvalid for a malformed hash.
func (l *Ledger) DocumentBySHA(ctx context.Context, sha string) (*Document, error) {
	sum := strings.ToLower(sha)
	if !isSHA256Hex(sum) {
		return nil, fmt.Errorf("ledger: document %q: not 64 hex digits: %w", sha, ErrInvalid)
	}
	d, err := scanDocument(l.db.QueryRowContext(ctx, `SELECT `+documentColumns+` FROM documents WHERE sha256 = ? ORDER BY rowid LIMIT 1`, sum))
	if errors.Is(err, sql.ErrNoRows) {
		return nil, fmt.Errorf("ledger: document %s: %w", sum, ErrNotFound)
	}
	if err != nil {
		return nil, fmt.Errorf("ledger: document %s: %w", sum, err)
	}
	d.Path = l.Locate(d.Path)
	return &d, nil
}

// DocumentsFor returns the documents of certificate number in the order recorded,
// their Paths resolved (Locate); an empty slice if it has none yet. ErrNotFound (wrapped) for a number no run has.
func (l *Ledger) DocumentsFor(ctx context.Context, number string) ([]Document, error) {
	var out []Document
	err := l.readTx(ctx, func(tx *sql.Tx) error {
		if _, err := runOfCertificate(ctx, tx, number); err != nil {
			return err
		}
		rows, err := tx.QueryContext(ctx, `SELECT `+documentColumns+` FROM documents WHERE number = ? ORDER BY rowid`, number)
		out, err = collect(rows, err, scanDocument)
		return err
	})
	if err != nil {
		return nil, fmt.Errorf("ledger: documents of %s: %w", number, err)
	}
	for i := range out {
		out[i].Path = l.Locate(out[i].Path)
	}
	return out, nil
}

// RunMeta is what the ledger adds to a stored record: its certificate number, the
// SHA-256 of its canonical JSON, its signature and its chain link.
type RunMeta struct {
	RunID, Certificate, RecordSHA256, KeyID string
	Signature                               []byte // nil when unsigned
	ChainHash                               string
	ChainSeq                                int64 // position in the station's chain, from 1
}

const runMetaColumns = `run_id, coalesce(certificate, ''), record_sha256, key_id, signature, chain_hash, chain_seq`

func scanRunMeta(s scanner, extra ...any) (RunMeta, error) {
	var m RunMeta
	if err := s.Scan(append([]any{&m.RunID, &m.Certificate, &m.RecordSHA256, &m.KeyID, &m.Signature, &m.ChainHash, &m.ChainSeq}, extra...)...); err != nil {
		return RunMeta{}, err
	}
	if len(m.Signature) == 0 {
		m.Signature = nil
	}
	return m, nil
}

// RunByCertificate returns the record that certificate number was issued for, as Run
// returns it (checked against its SHA-256), and its RunMeta. Errors (wrapped):
// ErrNotFound for a number no run has; ErrCorrupt as for Run.
func (l *Ledger) RunByCertificate(ctx context.Context, number string) (*sequencer.Record, RunMeta, error) {
	return l.runWithMeta(ctx, "certificate", number, "certificate "+number)
}

// runWithMeta reads one run's record and RunMeta by a unique column (certificate
// or run_id); what names it in errors.
func (l *Ledger) runWithMeta(ctx context.Context, column, value, what string) (*sequencer.Record, RunMeta, error) {
	var doc []byte
	m, err := scanRunMeta(l.db.QueryRowContext(ctx, `SELECT `+runMetaColumns+`, record_json FROM runs WHERE `+column+` = ?`, value), &doc)
	if errors.Is(err, sql.ErrNoRows) {
		return nil, RunMeta{}, fmt.Errorf("ledger: %s: %w", what, ErrNotFound)
	}
	if err != nil {
		return nil, RunMeta{}, fmt.Errorf("ledger: %s: %w", what, err)
	}
	rec, err := decodeRecord(m.RunID, doc, m.RecordSHA256)
	if err != nil {
		return nil, RunMeta{}, fmt.Errorf("ledger: %w", err)
	}
	return rec, m, nil
}

// decodeRecord checks doc against its stored SHA-256 and decodes it.
func decodeRecord(runID string, doc []byte, sum string) (*sequencer.Record, error) {
	if got := sha256Hex(doc); got != sum {
		return nil, fmt.Errorf("run %s: record SHA-256 is %s, stored %s: %w", runID, got, sum, ErrCorrupt)
	}
	rec := new(sequencer.Record)
	if err := decodeCanonical(doc, rec); err != nil {
		return nil, fmt.Errorf("run %s: decode record: %v: %w", runID, err, ErrCorrupt)
	}
	return rec, nil
}

// MissingDocuments lists the certified runs that have no document and whose
// certificate is not voided, in the order they were recorded: runs whose process
// stopped between storing the run and recording its PDF. Make their documents
// (RunByCertificate gives the record) and record them with AddSignedDocument at the
// next start. It returns an empty slice when there are none.
func (l *Ledger) MissingDocuments(ctx context.Context) ([]RunMeta, error) {
	rows, err := l.db.QueryContext(ctx, `
		SELECT `+runMetaColumns+` FROM runs r
		WHERE certificate IS NOT NULL
			AND NOT EXISTS (SELECT 1 FROM documents d WHERE d.run_id = r.run_id)
			AND NOT EXISTS (SELECT 1 FROM audit_trail a WHERE a.subject = r.certificate AND a.action = ?)
		ORDER BY rowid`, ActionVoid)
	out, err := collect(rows, err, func(r scanner) (RunMeta, error) { return scanRunMeta(r) })
	if err != nil {
		return nil, fmt.Errorf("ledger: missing documents: %w", err)
	}
	return out, nil
}

// Blob returns the content of a file in force stored by RecordRunWith, by the
// SHA-256 of the content (hex, either case), after checking the content against it.
// Errors (wrapped): ErrInvalid for a malformed hash; ErrNotFound if the ledger does
// not have it; ErrCorrupt if the stored bytes do not hash to sha or have another size
// than stored.
func (l *Ledger) Blob(ctx context.Context, sha string) ([]byte, error) {
	sum := strings.ToLower(sha)
	if !isSHA256Hex(sum) {
		return nil, fmt.Errorf("ledger: blob %q: not 64 hex digits: %w", sha, ErrInvalid)
	}
	var size int64
	var data []byte
	err := l.db.QueryRowContext(ctx, `SELECT size, data FROM blobs WHERE sha256 = ?`, sum).Scan(&size, &data)
	if errors.Is(err, sql.ErrNoRows) {
		return nil, fmt.Errorf("ledger: blob %s: %w", sum, ErrNotFound)
	}
	if err != nil {
		return nil, fmt.Errorf("ledger: blob %s: %w", sum, err)
	}
	if got := sha256Hex(data); got != sum || int64(len(data)) != size {
		return nil, fmt.Errorf("ledger: blob %s: content has SHA-256 %s and %d bytes, stored size %d: %w", sum, got, len(data), size, ErrCorrupt)
	}
	if data == nil {
		data = []byte{}
	}
	return data, nil
}
