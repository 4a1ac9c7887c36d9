package ledger

import (
	"bytes"
	"context"
	"database/sql"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"strings"
	"time"

	"trimline/reports/signing"
	"trimline/sequencer"
)

// Imported runs (migration 0004) are other stations' runs, brought in from their
// archive bundles (reports/bundle) for audit: the record's canonical JSON byte for
// byte with its SHA-256 and signature as the source station made them, the
// certificate number it issued, and, in blobs, the contents of its files in force,
// its certificate PDF, the PDF's seal and the station's public key.
//
// They are kept apart from the ledger's own runs. An imported run has no link in
// any local hash chain and takes no local certificate number; Run, Runs,
// RunByCertificate, Counts, MissingDocuments and VerifyChain's run and certificate
// checks do not see it (VerifyChain does check the blobs and the audit trail entry
// an import adds, which are ordinary ones). VerifyImports checks the imported runs.
//
// Imported rows are append-only like every other (triggers refuse UPDATE and
// DELETE). Each import is one audit trail entry, action "import", subject the run
// id, whose detail (importDetail, JSON) repeats everything of the row but the
// record JSON, so a changed row shows against the hash-chained trail.

// ActionImport is the audit trail action ImportRun writes; subject is the run id.
// (Audit does not refuse it; VerifyImports only considers "import" entries whose
// detail is ImportRun's JSON, importFormat.)
const ActionImport = "import"

// ErrImportConflict (wrapped) is ImportRun's error for a run id that is imported
// already with other contents (another record, signature, PDF, seal or key), or a
// certificate number that another imported run has.
var ErrImportConflict = errors.New("ledger: conflicts with an imported run")

// ErrAlreadyImported (wrapped) is ImportRun's answer when the run is imported
// already with the same contents: nothing was written, and the ledger holds the
// run as it would after the import. It is not a failure; callers that import a
// bundle twice tell the person so.
var ErrAlreadyImported = errors.New("ledger: imported already")

// importFormat marks the detail of an audit trail entry written by ImportRun.
const importFormat = "trimline-import-v1"

// ImportedRun is one imported run.
//
// ImportRun reads every field but ImportedAt; the read methods fill every field but
// the contents (Files, PDF, Seal, PublicKey), which are in blobs (Blob reads them
// by the SHA-256 fields and the record's Files), and ImportedRuns leaves RecordJSON
// nil too.
type ImportedRun struct {
	RunID   string
	Number  string // the certificate number the source station issued; "" for a FAULT or ABORTED run
	Station string // the record's station
	Serial  string

	RecordJSON   []byte // the record's canonical JSON (Canonical), as the source kept it
	RecordSHA256 string // lowercase hex SHA-256 of RecordJSON
	// KeyID and Signature are the source's signature over
	// signing.RecordMessage(Number, RunID, RecordSHA256); both empty when unsigned. The
	// ledger stores them; the importer checks them (reports/bundle does).
	KeyID     string
	Signature []byte

	// The SHA-256 (lowercase hex) of the certificate PDF, its seal and the source's
	// public key (PEM) kept in blobs; "" for each that was not imported. ImportRun
	// computes them from PDF, Seal and PublicKey; when given as well they must match.
	PDFSHA256, SealSHA256, PublicKeySHA256 string

	ImportedAt time.Time // when (l.Now(), UTC); ImportRun ignores it
	ImportedBy string    // who imported it (the audit trail entry's actor): required
	Source     string    // where it came from, free text (a bundle's SHA-256, a file name)

	// Contents, read by ImportRun only. Files is keyed by the lowercase hex SHA-256
	// of each content, as RecordOptions.Files: every entry is checked against its
	// key, and those the record's Files name are stored. A nil or empty PDF, Seal
	// or PublicKey is not imported.
	Files                map[string][]byte
	PDF, Seal, PublicKey []byte
}

// importDetail is the detail of an "import" entry: the row but its record JSON.
type importDetail struct {
	Format          string   `json:"format"` // importFormat
	Number          string   `json:"number,omitempty"`
	Station         string   `json:"station"`
	Serial          string   `json:"serial"`
	RecordSHA256    string   `json:"record_sha256"`
	KeyID           string   `json:"key_id,omitempty"`
	Signature       string   `json:"signature,omitempty"` // hex
	PDFSHA256       string   `json:"pdf_sha256,omitempty"`
	SealSHA256      string   `json:"seal_sha256,omitempty"`
	PublicKeySHA256 string   `json:"public_key_sha256,omitempty"`
	Source          string   `json:"source,omitempty"`
	Blobs           []string `json:"blobs,omitempty"` // SHA-256 of the file contents stored with it
}

// DecodeCanonical decodes a record's canonical JSON (Canonical's output, as
// record.json of a bundle holds it) and checks that it is canonical: the record
// encodes back to exactly doc. A record with a field this program does not know
// fails that check. ErrInvalid (wrapped) if doc does not decode or is not canonical.
func DecodeCanonical(doc []byte) (*sequencer.Record, error) {
	rec := new(sequencer.Record)
	if err := decodeCanonical(doc, rec); err != nil {
		return nil, fmt.Errorf("ledger: decode record: %v: %w", err, ErrInvalid)
	}
	again, err := canonicalJSON(rec)
	if err != nil {
		return nil, fmt.Errorf("ledger: decode record: re-encode: %v: %w", err, ErrInvalid)
	}
	if !bytes.Equal(again, doc) {
		return nil, fmt.Errorf("ledger: decode record: the JSON is not canonical (it does not encode back to the same bytes; a field this program does not know?): %w", ErrInvalid)
	}
	return rec, nil
}

// RunByID returns run runID's record, as Run returns it, and its RunMeta, for a
// run with or without a certificate number. Errors (wrapped): ErrNotFound for an
// unknown run id; ErrCorrupt as for Run.
func (l *Ledger) RunByID(ctx context.Context, runID string) (*sequencer.Record, RunMeta, error) {
	return l.runWithMeta(ctx, "run_id", runID, "run "+runID)
}

// ImportRun stores another station's run, in one transaction: the row of
// imported_runs, the contents in blobs (insert or ignore: a content already there
// is kept as it is) and an audit trail entry "import" by ir.ImportedBy, stamped with
// l.Now(). It checks that RecordSHA256 is the SHA-256 of RecordJSON, that
// RecordJSON is a canonical record (DecodeCanonical) whose run id, serial and
// station are ir's, that Number is given exactly for a PASS, FAIL or REVIEW record,
// the key id / signature pair, the content hashes, and that ImportedBy is given.
// It does not verify the signature (it holds no keys): the importer does.
//
// Importing the same run again writes nothing and returns ErrAlreadyImported when
// the number, station, serial, record SHA-256, key id, signature and PDF, seal and
// key hashes are the ones stored, whatever the source or importer; otherwise it
// fails with ErrImportConflict, as it does for a number another imported run has.
//
// Errors (wrapped): ErrInvalid for a failed check; ErrDuplicateRun for a run id
// that is one of the ledger's own runs; ErrAlreadyImported; ErrImportConflict.
func (l *Ledger) ImportRun(ctx context.Context, ir ImportedRun) error {
	blobs, nFiles, err := prepareImport(&ir)
	if err != nil {
		return fmt.Errorf("ledger: import run %s: %w", ir.RunID, err)
	}
	err = l.inTx(ctx, func(tx *sql.Tx) error {
		at := formatTime(l.now()) // with the write lock held: the trail's times follow its order
		var one int
		switch err := tx.QueryRowContext(ctx, `SELECT 1 FROM runs WHERE run_id = ?`, ir.RunID).Scan(&one); {
		case err == nil:
			return fmt.Errorf("it is one of this ledger's own runs: %w", ErrDuplicateRun)
		case !errors.Is(err, sql.ErrNoRows):
			return err
		}
		old, err := scanImported(tx.QueryRowContext(ctx, `SELECT `+importedColumns+` FROM imported_runs WHERE run_id = ?`, ir.RunID))
		switch {
		case err == nil:
			if sameImport(old, ir) {
				return fmt.Errorf("%s by %s, with the same contents; nothing written: %w", formatTime(old.ImportedAt), old.ImportedBy, ErrAlreadyImported)
			}
			return fmt.Errorf("imported already (%s by %s) with other contents: record SHA-256 %s, certificate %q, key %q, PDF %q, seal %q, public key %q: %w",
				formatTime(old.ImportedAt), old.ImportedBy, old.RecordSHA256, old.Number, old.KeyID, old.PDFSHA256, old.SealSHA256, old.PublicKeySHA256, ErrImportConflict)
		case !errors.Is(err, sql.ErrNoRows):
			return err
		}
		if ir.Number != "" {
			var other string
			switch err := tx.QueryRowContext(ctx, `SELECT run_id FROM imported_runs WHERE number = ?`, ir.Number).Scan(&other); {
			case err == nil:
				return fmt.Errorf("certificate %s is imported already as run %s: %w", ir.Number, other, ErrImportConflict)
			case !errors.Is(err, sql.ErrNoRows):
				return err
			}
		}
		var fileSHAs []string
		for i, b := range blobs {
			if _, err := tx.ExecContext(ctx, `INSERT INTO blobs (sha256, size, data) VALUES (?, ?, ?) ON CONFLICT (sha256) DO NOTHING`,
				b.sha, len(b.data), nonNilBytes(b.data)); err != nil {
				return fmt.Errorf("blob %s: %w", b.sha, err)
			}
			if i < nFiles {
				fileSHAs = append(fileSHAs, b.sha)
			}
		}
		if _, err := tx.ExecContext(ctx, `
			INSERT INTO imported_runs (run_id, number, station, serial, record_json, record_sha256, key_id, signature,
				pdf_sha256, seal_sha256, public_key_sha256, imported_at, imported_by, source)
			VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`,
			ir.RunID, ir.Number, ir.Station, ir.Serial, string(ir.RecordJSON), ir.RecordSHA256, ir.KeyID, nonNilBytes(ir.Signature),
			nullText(ir.PDFSHA256), nullText(ir.SealSHA256), nullText(ir.PublicKeySHA256), at, ir.ImportedBy, ir.Source); err != nil {
			return fmt.Errorf("imported run row: %w", err)
		}
		detail, err := json.Marshal(importDetailOf(ir, fileSHAs))
		if err != nil {
			return err
		}
		_, err = appendAudit(ctx, tx, at, ir.ImportedBy, ActionImport, ir.RunID, string(detail))
		return err
	})
	if err != nil {
		return fmt.Errorf("ledger: import run %s: %w", ir.RunID, err)
	}
	return nil
}

// prepareImport checks ir, completes its content hashes and returns the blobs to
// store: the nFiles files the record names, then the PDF, seal and public key.
func prepareImport(ir *ImportedRun) (blobs []blob, nFiles int, err error) {
	switch {
	case ir.RunID == "":
		return nil, 0, fmt.Errorf("no run id: %w", ErrInvalid)
	case hasControl(ir.RunID):
		return nil, 0, fmt.Errorf("run id %q has control characters: %w", ir.RunID, ErrInvalid)
	case hasControl(ir.Number):
		return nil, 0, fmt.Errorf("certificate number %q has control characters: %w", ir.Number, ErrInvalid)
	case ir.ImportedBy == "":
		return nil, 0, fmt.Errorf("no importer (ImportedBy): %w", ErrInvalid)
	}
	if got := sha256Hex(ir.RecordJSON); got != ir.RecordSHA256 {
		return nil, 0, fmt.Errorf("record JSON has SHA-256 %s, given %q: %w", got, ir.RecordSHA256, ErrInvalid)
	}
	rec, err := DecodeCanonical(ir.RecordJSON)
	if err != nil {
		return nil, 0, err
	}
	if err := validateRecord(rec); err != nil {
		return nil, 0, err
	}
	for _, f := range []struct{ name, given, rec string }{
		{"run id", ir.RunID, rec.RunID}, {"serial", ir.Serial, rec.Serial}, {"station", ir.Station, rec.Station},
	} {
		if f.given != f.rec {
			return nil, 0, fmt.Errorf("%s %q, the record has %q: %w", f.name, f.given, f.rec, ErrInvalid)
		}
	}
	if certified(rec.Verdict) != (ir.Number != "") {
		return nil, 0, fmt.Errorf("certificate number %q for a %s record: %w", ir.Number, rec.Verdict, ErrInvalid)
	}
	if err := validateSignature(ir.KeyID, ir.Signature); err != nil {
		return nil, 0, err
	}
	blobs, err = filesToStore(rec, ir.Files)
	if err != nil {
		return nil, 0, err
	}
	nFiles = len(blobs)
	seen := map[string]bool{}
	for _, b := range blobs {
		seen[b.sha] = true
	}
	for _, c := range []struct {
		name string
		data []byte
		sum  *string
	}{{"PDF", ir.PDF, &ir.PDFSHA256}, {"seal", ir.Seal, &ir.SealSHA256}, {"public key", ir.PublicKey, &ir.PublicKeySHA256}} {
		given := strings.ToLower(*c.sum)
		if len(c.data) == 0 {
			if given != "" {
				return nil, 0, fmt.Errorf("%s SHA-256 %s given without its content: %w", c.name, *c.sum, ErrInvalid)
			}
			*c.sum = ""
			continue
		}
		got := sha256Hex(c.data)
		if given != "" && given != got {
			return nil, 0, fmt.Errorf("%s has SHA-256 %s, given %s: %w", c.name, got, *c.sum, ErrInvalid)
		}
		*c.sum = got
		if !seen[got] {
			seen[got] = true
			blobs = append(blobs, blob{got, c.data})
		}
	}
	if len(ir.Signature) == 0 {
		ir.Signature = nil
	}
	return blobs, nFiles, nil
}

func importDetailOf(ir ImportedRun, fileSHAs []string) importDetail {
	return importDetail{Format: importFormat, Number: ir.Number, Station: ir.Station, Serial: ir.Serial,
		RecordSHA256: ir.RecordSHA256, KeyID: ir.KeyID, Signature: hex.EncodeToString(ir.Signature),
		PDFSHA256: ir.PDFSHA256, SealSHA256: ir.SealSHA256, PublicKeySHA256: ir.PublicKeySHA256,
		Source: ir.Source, Blobs: fileSHAs}
}

// sameImport reports whether a stored import and a new one are the same import.
func sameImport(a, b ImportedRun) bool {
	return a.RunID == b.RunID && a.Number == b.Number && a.Station == b.Station && a.Serial == b.Serial &&
		a.RecordSHA256 == b.RecordSHA256 && a.KeyID == b.KeyID && bytes.Equal(a.Signature, b.Signature) &&
		a.PDFSHA256 == b.PDFSHA256 && a.SealSHA256 == b.SealSHA256 && a.PublicKeySHA256 == b.PublicKeySHA256
}

const importedColumns = `run_id, number, station, serial, record_sha256, key_id, signature,
	coalesce(pdf_sha256, ''), coalesce(seal_sha256, ''), coalesce(public_key_sha256, ''), imported_at, imported_by, source`

func scanImported(s scanner, extra ...any) (ImportedRun, error) {
	var ir ImportedRun
	var at string
	if err := s.Scan(append([]any{&ir.RunID, &ir.Number, &ir.Station, &ir.Serial, &ir.RecordSHA256, &ir.KeyID, &ir.Signature,
		&ir.PDFSHA256, &ir.SealSHA256, &ir.PublicKeySHA256, &at, &ir.ImportedBy, &ir.Source}, extra...)...); err != nil {
		return ImportedRun{}, err
	}
	if err := stamped(at, &ir.ImportedAt, &ir.Signature); err != nil {
		return ImportedRun{}, err
	}
	return ir, nil
}

// importedRun reads one imported run with its record, checked against its SHA-256.
func (l *Ledger) importedRun(ctx context.Context, what, where string, arg string) (*sequencer.Record, ImportedRun, error) {
	var doc []byte
	ir, err := scanImported(l.db.QueryRowContext(ctx, `SELECT `+importedColumns+`, record_json FROM imported_runs WHERE `+where, arg), &doc)
	if errors.Is(err, sql.ErrNoRows) {
		return nil, ImportedRun{}, fmt.Errorf("ledger: imported %s: %w", what, ErrNotFound)
	}
	if err != nil {
		return nil, ImportedRun{}, fmt.Errorf("ledger: imported %s: %w", what, err)
	}
	rec, err := decodeRecord(ir.RunID, doc, ir.RecordSHA256)
	if err != nil {
		return nil, ImportedRun{}, fmt.Errorf("ledger: imported %s: %w", what, err)
	}
	ir.RecordJSON = doc
	return rec, ir, nil
}

// ImportedRunByCertificate returns the imported run that its source station issued
// certificate number for: the record decoded from the stored JSON after checking it
// against its SHA-256, and the ImportedRun with RecordJSON. Errors (wrapped):
// ErrNotFound if no imported run has the number (the ledger's own runs are not
// searched: RunByCertificate); ErrCorrupt as for Run.
func (l *Ledger) ImportedRunByCertificate(ctx context.Context, number string) (*sequencer.Record, ImportedRun, error) {
	if number == "" {
		return nil, ImportedRun{}, fmt.Errorf("ledger: imported certificate \"\": %w", ErrNotFound)
	}
	return l.importedRun(ctx, "certificate "+number, `number = ?`, number)
}

// ImportedRunByID is ImportedRunByCertificate by run id, for runs with or without
// a number.
func (l *Ledger) ImportedRunByID(ctx context.Context, runID string) (*sequencer.Record, ImportedRun, error) {
	return l.importedRun(ctx, "run "+runID, `run_id = ?`, runID)
}

// ImportedRuns lists the imported runs in the order imported, without their
// record JSON (ImportedRunByID reads it). It returns an empty slice when there are
// none.
func (l *Ledger) ImportedRuns(ctx context.Context) ([]ImportedRun, error) {
	rows, err := l.db.QueryContext(ctx, `SELECT `+importedColumns+` FROM imported_runs ORDER BY rowid`)
	out, err := collect(rows, err, func(r scanner) (ImportedRun, error) { return scanImported(r) })
	if err != nil {
		return nil, fmt.Errorf("ledger: imported runs: %w", err)
	}
	return out, nil
}

// ImportedRunsOf lists the imported runs of serial number serial in the order
// imported, without their record JSON (ImportedRunByID reads it), as Runs does for
// the ledger's own runs. It returns an empty slice when there are none.
func (l *Ledger) ImportedRunsOf(ctx context.Context, serial string) ([]ImportedRun, error) {
	rows, err := l.db.QueryContext(ctx, `SELECT `+importedColumns+` FROM imported_runs WHERE serial = ? ORDER BY rowid`, serial)
	out, err := collect(rows, err, func(r scanner) (ImportedRun, error) { return scanImported(r) })
	if err != nil {
		return nil, fmt.Errorf("ledger: imported runs of %s: %w", serial, err)
	}
	return out, nil
}

// ImportReport is VerifyImports' result.
type ImportReport struct {
	OK bool
	// BrokenAt is the run id at the first broken link, "" if OK or if the break is
	// not in an imported run; BrokenAuditSeq the audit trail entry at the break, 0
	// if none.
	BrokenAt       string
	BrokenAuditSeq int64
	Reason         string // what is wrong, "" if OK

	// What was checked before the break (all of it when OK).
	Imports  int // imported runs
	Signed   int // with a signature
	Verified int // signatures found good by ChainOptions.Verify
	Unsigned int
}

// importTriggers are the append-only triggers of imported_runs.
var importTriggers = []string{"imported_runs_no_update", "imported_runs_no_delete"}

// VerifyImports re-checks the imported runs, as VerifyChain does the ledger's own
// (which VerifyChain does not look at), and reports the first broken link:
//
//  1. the append-only triggers of imported_runs are there;
//  2. the import entries of the audit trail (those whose detail is ImportRun's
//     JSON): at most one per run id, and each has its row;
//  3. every imported run: record_json hashes to record_sha256, is a canonical
//     record whose run id, serial and station are the row's, and has a number
//     exactly if its verdict is PASS, FAIL or REVIEW; the signature (opts' Verify,
//     over signing.RecordMessage(number, run id, record SHA-256), and RequireSignatures);
//     its import entry agrees with the row (time and importer included), and the
//     blobs it names exist.
//
// It relies on VerifyChain for the audit trail's own hash chain and the blobs'
// contents. A broken import is not an error: OK is false and the error nil.
func (l *Ledger) VerifyImports(ctx context.Context, opts ...ChainOptions) (ImportReport, error) {
	opt, err := chainOption("verify imports", opts)
	if err != nil {
		return ImportReport{}, err
	}
	rep := ImportReport{OK: true}
	broken := func(runID string, seq int64, format string, args ...any) error {
		rep.OK, rep.BrokenAt, rep.BrokenAuditSeq, rep.Reason = false, runID, seq, fmt.Sprintf(format, args...)
		return errBroken
	}
	err = l.readTx(ctx, func(tx *sql.Tx) error {
		if t, err := missingTrigger(ctx, tx, importTriggers); err != nil {
			return err
		} else if t != "" {
			return broken("", 0, "the append-only trigger %s is missing", t)
		}

		type entry struct {
			seq       int64
			at, actor string
			d         importDetail
			seen      bool
		}
		entries := map[string]*entry{}
		var order []string
		if err := eachRow(ctx, tx, `SELECT seq, at, actor, subject, detail FROM audit_trail WHERE action = ? ORDER BY seq`, []any{ActionImport}, func(rows *sql.Rows) error {
			var e entry
			var subject, detail string
			if err := rows.Scan(&e.seq, &e.at, &e.actor, &subject, &detail); err != nil {
				return err
			}
			if json.Unmarshal([]byte(detail), &e.d) != nil || e.d.Format != importFormat {
				return nil // another part's free-text "import" entry
			}
			if first := entries[subject]; first != nil {
				return broken(subject, e.seq, "audit trail entry %d: a second import entry for run %s (the first is entry %d)", e.seq, subject, first.seq)
			}
			entries[subject] = &e
			order = append(order, subject)
			return nil
		}); err != nil {
			return err
		}

		blobSet, err := stringSet(ctx, tx, `SELECT sha256 FROM blobs`)
		if err != nil {
			return err
		}

		if err := eachRow(ctx, tx, `SELECT `+importedColumns+`, record_json FROM imported_runs ORDER BY rowid`, nil, func(rows *sql.Rows) error {
			var doc []byte
			ir, err := scanImported(rows, &doc)
			if err != nil {
				return broken("", 0, "imported run row %d: %v", rep.Imports+1, err)
			}
			id := ir.RunID
			fail := func(format string, args ...any) error {
				return broken(id, 0, "imported run %s: %s", id, fmt.Sprintf(format, args...))
			}
			if got := sha256Hex(doc); got != ir.RecordSHA256 {
				return fail("record_json has SHA-256 %s, record_sha256 is %s", got, ir.RecordSHA256)
			}
			rec, err := DecodeCanonical(doc)
			if err != nil {
				return fail("%v", err)
			}
			for _, f := range []struct{ name, row, rec string }{
				{"run_id", ir.RunID, rec.RunID}, {"serial", ir.Serial, rec.Serial}, {"station", ir.Station, rec.Station},
			} {
				if f.row != f.rec {
					return fail("column %s is %q, the record has %q", f.name, f.row, f.rec)
				}
			}
			if certified(rec.Verdict) != (ir.Number != "") {
				return fail("certificate number %q for a %s record", ir.Number, rec.Verdict)
			}
			if err := validateSignature(ir.KeyID, ir.Signature); err != nil {
				return fail("%v", err)
			}
			if ir.KeyID == "" {
				rep.Unsigned++
				if opt.RequireSignatures {
					return fail("not signed")
				}
			} else {
				rep.Signed++
				if opt.Verify != nil {
					if !opt.Verify(ir.KeyID, signing.RecordMessage(ir.Number, ir.RunID, ir.RecordSHA256), ir.Signature) {
						return fail("the signature of key %q does not verify", ir.KeyID)
					}
					rep.Verified++
				}
			}
			e := entries[id]
			if e == nil {
				return fail("the audit trail has no import entry for it")
			}
			e.seen = true
			want := importDetailOf(ir, e.d.Blobs)
			for _, f := range []struct{ name, row, trail string }{
				{"number", want.Number, e.d.Number}, {"station", want.Station, e.d.Station}, {"serial", want.Serial, e.d.Serial},
				{"record_sha256", want.RecordSHA256, e.d.RecordSHA256}, {"key_id", want.KeyID, e.d.KeyID},
				{"signature", want.Signature, e.d.Signature}, {"pdf_sha256", want.PDFSHA256, e.d.PDFSHA256},
				{"seal_sha256", want.SealSHA256, e.d.SealSHA256}, {"public_key_sha256", want.PublicKeySHA256, e.d.PublicKeySHA256},
				{"source", want.Source, e.d.Source}, {"imported_at", formatTime(ir.ImportedAt), e.at}, {"imported_by", ir.ImportedBy, e.actor},
			} {
				if f.row != f.trail {
					return broken(id, e.seq, "imported run %s: %s is %q, its import entry %d has %q", id, f.name, f.row, e.seq, f.trail)
				}
			}
			for _, b := range append([]string{ir.PDFSHA256, ir.SealSHA256, ir.PublicKeySHA256}, e.d.Blobs...) {
				if b != "" && !blobSet[b] {
					return broken(id, e.seq, "imported run %s: blob %s, stored with it (entry %d), is missing", id, b, e.seq)
				}
			}
			rep.Imports++
			return nil
		}); err != nil {
			return err
		}
		for _, id := range order {
			if e := entries[id]; !e.seen {
				return broken(id, e.seq, "audit trail entry %d records the import of run %s, which is not in the ledger", e.seq, id)
			}
		}
		return nil
	})
	if errors.Is(err, errBroken) {
		return rep, nil
	}
	if err != nil {
		return ImportReport{}, fmt.Errorf("ledger: verify imports: %w", err)
	}
	return rep, nil
}
