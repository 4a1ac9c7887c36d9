package ledger

import (
	"context"
	"database/sql"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"maps"
	"slices"
	"strconv"
	"strings"
	"time"

	"trimline/reports/signing"
	"trimline/sequencer"
)

// Canonical returns the canonical JSON of rec: exactly the bytes RecordRun stores
// as runs.record_json, so that a signer outside the package signs what the ledger
// keeps. It is json.Marshal's output, except that a NaN or ±Inf float is the string
// "NaN", "Infinity" or "-Infinity" (json.Marshal refuses them). ErrInvalid (wrapped)
// for a nil record.
func Canonical(rec *sequencer.Record) ([]byte, error) {
	if rec == nil {
		return nil, fmt.Errorf("ledger: canonical JSON: nil record: %w", ErrInvalid)
	}
	b, err := canonicalJSON(rec)
	if err != nil {
		return nil, fmt.Errorf("ledger: canonical JSON of run %s: %w", rec.RunID, err)
	}
	return b, nil
}

// RecordSHA256 returns the lowercase hex SHA-256 of Canonical(rec): the run's
// record_sha256, which the Sign callback receives.
func RecordSHA256(rec *sequencer.Record) (string, error) {
	b, err := Canonical(rec)
	if err != nil {
		return "", err
	}
	return sha256Hex(b), nil
}

// chainHash is a run's chain_hash; RecordRunWith documents the line.
func chainHash(prev, runID, cert, recordSHA, verdict, keyID string, sig []byte) string {
	line := "trimline-chain-v1\n" + prev + "\n" + runID + "\n" + cert + "\n" + recordSHA + "\n" +
		verdict + "\n" + keyID + "\n" + hex.EncodeToString(sig)
	return sha256Hex([]byte(line))
}

// ChainOptions are VerifyChain's options.
type ChainOptions struct {
	// Verify, if not nil, checks each signed run's signature: it must report whether
	// sig is keyID's signature over msg (signing.RecordMessage of the run). A false is a
	// broken link. Without Verify, signatures are only checked to be covered by the
	// chain.
	Verify func(keyID string, msg, sig []byte) bool
	// RequireSignatures makes an unsigned run a broken link. Runs recorded without a
	// Sign callback (by RecordRun, or before migration 0003) are unsigned.
	RequireSignatures bool
	// Since, if not empty, are heads saved by an earlier check (FormatHeads,
	// ParseHeads) to verify from: each must be on its chain at its position, and
	// the runs of its station up to it are trusted through it, not checked again
	// (not their links, signatures, records nor rows; ChainReport.TrustedRuns). The
	// runs after it are checked fully, the first linking to it. A station without a
	// saved head is checked fully. An audit trail head is checked for on the trail,
	// which is walked fully, as are the blobs, certificate numbers, documents and
	// units. Two heads of one chain are ErrInvalid.
	Since []Head
}

// ChainReport is VerifyChain's result.
type ChainReport struct {
	// Station is the station asked for ("" for all); when OK is false, the station
	// of the broken run, "" if the break is not in a run.
	Station string
	OK      bool
	// BrokenAt is the run id at the first broken link, "" if OK or if the break is
	// not in a run; BrokenAuditSeq the audit trail entry at the break, 0 if none.
	BrokenAt       string
	BrokenAuditSeq int64
	// BrokenTable is the table at the break when it is in a table's rows or its
	// append-only trigger ("readings", "runs", ...), "" otherwise; BrokenColumn the
	// column whose value differs from the signed record, "" when the break is not
	// one value (a missing or extra row, a missing trigger).
	BrokenTable  string
	BrokenColumn string
	Reason       string // what is wrong, "" if OK

	// What was checked before the break (all of it when OK).
	Stations     int // station chains walked
	Runs         int
	Signed       int // runs with a signature
	Verified     int // signatures found good by Verify
	Unsigned     int // runs without a signature
	Certificates int
	Documents    int
	Blobs        int
	AuditEntries int

	// Heads is the chain_hash of the last run of every station walked, and AuditHead
	// the hash of the last audit trail entry. Kept outside the ledger (printed,
	// mailed, signed), they make a rewrite of the whole ledger evident too.
	Heads     map[string]string
	AuditHead string
	// TrustedRuns counts the runs trusted through a saved head (ChainOptions.Since),
	// not checked again and not in Runs, Signed, Verified or Unsigned.
	TrustedRuns int

	// HeadSeqs is the chain_seq of each station's head: its number of runs. The
	// audit trail's head is entry AuditEntries. HeadList gives all heads as Heads,
	// to save (FormatHeads) and check later (CheckHeads).
	HeadSeqs map[string]int64
}

// appendOnlyTrigger is a trigger VerifyChain requires and the table it guards.
type appendOnlyTrigger struct{ name, table string }

// appendOnlyTriggers are the triggers VerifyChain requires; their absence means
// someone took the guard rails off.
var appendOnlyTriggers = []appendOnlyTrigger{
	{"runs_no_update", "runs"}, {"runs_no_delete", "runs"}, {"runs_chain_required", "runs"},
	{"readings_no_update", "readings"}, {"readings_no_delete", "readings"},
	{"results_no_update", "results"}, {"results_no_delete", "results"},
	{"limit_outcomes_no_update", "limit_outcomes"}, {"limit_outcomes_no_delete", "limit_outcomes"},
	{"fits_no_update", "fits"}, {"fits_no_delete", "fits"}, {"trims_no_update", "trims"}, {"trims_no_delete", "trims"},
	{"files_no_update", "files"}, {"files_no_delete", "files"},
	{"instruments_no_update", "instruments"}, {"instruments_no_delete", "instruments"},
	{"documents_no_update", "documents"}, {"documents_no_delete", "documents"},
	{"cert_sequences_no_delete", "cert_sequences"}, {"cert_sequences_no_decrease", "cert_sequences"},
	{"blobs_no_update", "blobs"}, {"blobs_no_delete", "blobs"},
	{"audit_trail_no_update", "audit_trail"}, {"audit_trail_no_delete", "audit_trail"},
	{"sweeps_no_update", "sweeps"}, {"sweeps_no_delete", "sweeps"}, {"steps_no_update", "steps"}, {"steps_no_delete", "steps"},
}

// VerifyChain re-checks the ledger and reports the first broken link, in this order:
//
//  1. the append-only triggers are all there, each on its table;
//  2. the audit trail: entries numbered 1, 2, 3, ... without gaps, each prev_hash the
//     previous entry's hash and each hash its content's (audit.go); at most one
//     create entry per run and one void entry per certificate;
//  3. every blob's content has its SHA-256 and size;
//  4. the runs of station (every station when station is ""), station by station in
//     chain order: record_json hashes to record_sha256; the run's columns (run id,
//     serial, product, revision, station, operator, software, times, verdict,
//     reasons, fault, retest_of) are those of its record; chain_seq counts 1, 2, 3, ...;
//     chain_prev is the previous run's chain_hash ("" for the first) and chain_hash
//     recomputes; the signature (opts' Verify and RequireSignatures); the run's
//     create entry in the trail agrees with the row, and the blobs it names exist;
//  5. every create entry (of station, if given) has its run;
//  6. certificate numbers, all prefixes: each well formed, none twice, and every
//     prefix's numbers exactly 1 … its sequence's last, without gaps; every void
//     entry names an existing certificate; every supersede entry (at most one per
//     certificate) names the certificate of its run and the certificate of a
//     retest of that run;
//  7. documents: each row has its issue entry, in order, and each issue entry its row;
//  8. the query rows (rows.go): every column of a runs row that repeats its record
//     (coverage and ambient conditions included), and every row of readings,
//     results, limit_outcomes, fits, trims, files and instruments, is the row the
//     ledger derives from the signed record_json (recordRows, the code that wrote
//     it), value for value, floats exactly; no row is missing, extra, or of a run
//     that is not in the ledger; and (for the whole ledger) each units row is the
//     one its serial's runs give, in the order they were stored (nextUnit). The
//     first difference names its table, run, row and column
//     (ChainReport.BrokenTable, BrokenColumn).
//
// A broken ledger is not an error: VerifyChain returns the report with OK false and
// a nil error. Errors are reserved for failures to read (and ErrInvalid for more
// than one ChainOptions). It reads one consistent snapshot; writers may go on.
//
// What the chains cannot show: a change that rewrites every hash after it (there is
// no secret in a hash), unless the signatures or heads kept elsewhere contradict it
// (CheckHeads).
func (l *Ledger) VerifyChain(ctx context.Context, station string, opts ...ChainOptions) (ChainReport, error) {
	opt, err := chainOption("verify chain", opts)
	if err != nil {
		return ChainReport{}, err
	}
	c := &chainCheck{ctx: ctx, opt: opt, station: station, since: map[string]Head{},
		rep: ChainReport{Station: station, OK: true, Heads: map[string]string{}, HeadSeqs: map[string]int64{}}}
	for _, h := range opt.Since {
		if _, twice := c.since[h.Chain()]; twice {
			return ChainReport{}, fmt.Errorf("ledger: verify chain: two saved heads of %s: %w", h.Chain(), ErrInvalid)
		}
		if h.Seq < 1 || !isSHA256Hex(h.Hash) {
			return ChainReport{}, fmt.Errorf("ledger: verify chain: saved head %d %s of %s: %w", h.Seq, h.Hash, h.Chain(), ErrInvalid)
		}
		c.since[h.Chain()] = h
	}
	err = l.readTx(ctx, func(tx *sql.Tx) error {
		c.tx = tx
		for _, step := range []func() error{c.triggers, c.auditTrail, c.blobs, c.runs, c.orphanCreates, c.certificates, c.documents, c.rows} {
			if err := step(); err != nil {
				return err
			}
		}
		return nil
	})
	if errors.Is(err, errBroken) {
		return c.rep, nil
	}
	if err != nil {
		return ChainReport{}, fmt.Errorf("ledger: verify chain: %w", err)
	}
	return c.rep, nil
}

// errBroken stops the walk at the first broken link.
var errBroken = errors.New("broken link")

type auditRef struct {
	seq     int64
	subject string
	idx     int // position among the issue entries of its certificate
	create  createDetail
	issue   issueDetail
	void    voidDetail
	super   supersedeDetail
	review  ReviewDetail
	seen    bool
}

type chainCheck struct {
	ctx     context.Context
	tx      *sql.Tx
	opt     ChainOptions
	station string
	rep     ChainReport
	since   map[string]Head // ChainOptions.Since by Head.Chain()

	creates    map[string]*auditRef   // run id -> create entry
	createList []*auditRef            // create entries in trail order
	issues     map[string][]*auditRef // certificate -> issue entries in trail order
	issueList  []*auditRef            // issue entries in trail order
	voids      map[string]*auditRef   // certificate -> void entry
	voidList   []*auditRef            // void entries in trail order
	supers     map[string]*auditRef   // certificate -> supersede entry
	superList  []*auditRef            // supersede entries in trail order
	reviewList []*auditRef            // review decision entries in trail order
	blobSet    map[string]bool
	runCert    map[string]string // run id -> certificate, for certified runs
}

// broken records the first broken link and stops the walk.
func (c *chainCheck) broken(station, runID string, seq int64, format string, args ...any) error {
	c.rep.OK = false
	c.rep.Station = station
	c.rep.BrokenAt = runID
	c.rep.BrokenAuditSeq = seq
	c.rep.Reason = fmt.Sprintf(format, args...)
	return errBroken
}

func (c *chainCheck) triggers() error {
	on := map[string]string{} // trigger -> its table
	err := eachRow(c.ctx, c.tx, `SELECT name, tbl_name FROM sqlite_schema WHERE type = 'trigger'`, nil, func(rows *sql.Rows) error {
		var name, table string
		err := rows.Scan(&name, &table)
		on[name] = table
		return err
	})
	if err != nil {
		return err
	}
	for _, t := range appendOnlyTriggers {
		table, ok := on[t.name]
		if ok && table == t.table {
			continue
		}
		err := c.broken("", "", 0, "the append-only trigger %s of table %s is missing", t.name, t.table)
		if ok {
			err = c.broken("", "", 0, "the append-only trigger %s of table %s is on table %s instead", t.name, t.table, table)
		}
		c.rep.BrokenTable = t.table
		return err
	}
	return nil
}

func (c *chainCheck) auditTrail() error {
	c.creates, c.issues, c.voids, c.supers = map[string]*auditRef{}, map[string][]*auditRef{}, map[string]*auditRef{}, map[string]*auditRef{}
	rows, err := c.tx.QueryContext(c.ctx, `SELECT seq, at, actor, action, subject, detail, prev_hash, hash FROM audit_trail ORDER BY seq`)
	if err != nil {
		return err
	}
	defer rows.Close()
	prev, want := "", int64(1)
	for rows.Next() {
		var e AuditEntry
		var at string
		if err := rows.Scan(&e.Seq, &at, &e.Actor, &e.Action, &e.Subject, &e.Detail, &e.PrevHash, &e.Hash); err != nil {
			return err
		}
		switch {
		case e.Seq != want:
			return c.broken("", "", e.Seq, "audit trail entry %d follows entry %d: entries are missing or renumbered", e.Seq, want-1)
		case e.PrevHash != prev:
			return c.broken("", "", e.Seq, "audit trail entry %d: prev_hash %s is not the hash of entry %d (%s)", e.Seq, e.PrevHash, e.Seq-1, prev)
		case auditHash(e.PrevHash, e.Seq, at, e.Actor, e.Action, e.Subject, e.Detail) != e.Hash:
			return c.broken("", "", e.Seq, "audit trail entry %d: hash %s does not match the entry's content", e.Seq, e.Hash)
		}
		if _, err := parseTime(at); err != nil {
			return c.broken("", "", e.Seq, "audit trail entry %d: time %q is not RFC 3339", e.Seq, at)
		}
		ref := &auditRef{seq: e.Seq, subject: e.Subject}
		var derr error
		switch e.Action {
		case ActionCreate:
			derr = json.Unmarshal([]byte(e.Detail), &ref.create)
			if c.creates[e.Subject] != nil {
				return c.broken("", e.Subject, e.Seq, "audit trail entry %d: a second create entry for run %s (the first is entry %d)", e.Seq, e.Subject, c.creates[e.Subject].seq)
			}
			c.creates[e.Subject] = ref
			c.createList = append(c.createList, ref)
		case ActionIssue:
			derr = json.Unmarshal([]byte(e.Detail), &ref.issue)
			ref.idx = len(c.issues[e.Subject])
			c.issues[e.Subject] = append(c.issues[e.Subject], ref)
			c.issueList = append(c.issueList, ref)
		case ActionVoid:
			derr = json.Unmarshal([]byte(e.Detail), &ref.void)
			if c.voids[e.Subject] != nil {
				return c.broken("", "", e.Seq, "audit trail entry %d: certificate %s voided a second time (first in entry %d)", e.Seq, e.Subject, c.voids[e.Subject].seq)
			}
			c.voids[e.Subject] = ref
			c.voidList = append(c.voidList, ref)
		case ActionSupersede:
			derr = json.Unmarshal([]byte(e.Detail), &ref.super)
			if c.supers[e.Subject] != nil {
				return c.broken("", "", e.Seq, "audit trail entry %d: certificate %s superseded a second time (first in entry %d)", e.Seq, e.Subject, c.supers[e.Subject].seq)
			}
			c.supers[e.Subject] = ref
			c.superList = append(c.superList, ref)
		case ActionReviewAccept, ActionReviewReject:
			derr = json.Unmarshal([]byte(e.Detail), &ref.review)
			c.reviewList = append(c.reviewList, ref)
		}
		if derr != nil {
			return c.broken("", "", e.Seq, "audit trail entry %d: %s detail is not its JSON object: %v", e.Seq, e.Action, derr)
		}
		if h, ok := c.since[auditTrailChain]; ok && h.Seq == e.Seq && h.Hash != e.Hash {
			return c.broken("", "", e.Seq, "the saved head of the audit trail is not on its chain: entry %d has hash %s, the saved head %s: the trail was rebuilt or rewritten", e.Seq, e.Hash, h.Hash)
		}
		prev = e.Hash
		want++
		c.rep.AuditEntries++
	}
	if err := rows.Err(); err != nil {
		return err
	}
	if h, ok := c.since[auditTrailChain]; ok && h.Seq > int64(c.rep.AuditEntries) {
		return c.broken("", "", 0, "the saved head of the audit trail is not on its chain: the trail has %d entries, the saved head is entry %d (%s): it was cut back or rebuilt", c.rep.AuditEntries, h.Seq, h.Hash)
	}
	c.rep.AuditHead = prev
	return nil
}

func (c *chainCheck) blobs() error {
	c.blobSet = map[string]bool{}
	rows, err := c.tx.QueryContext(c.ctx, `SELECT sha256, size, data FROM blobs ORDER BY sha256`)
	if err != nil {
		return err
	}
	defer rows.Close()
	for rows.Next() {
		var sum string
		var size int64
		var data []byte
		if err := rows.Scan(&sum, &size, &data); err != nil {
			return err
		}
		if got := sha256Hex(data); got != sum {
			return c.broken("", "", 0, "blob %s: content has SHA-256 %s", sum, got)
		}
		if int64(len(data)) != size {
			return c.broken("", "", 0, "blob %s: %d bytes, stored size %d", sum, len(data), size)
		}
		c.blobSet[sum] = true
		c.rep.Blobs++
	}
	return rows.Err()
}

type runRow struct {
	station                                string
	seq                                    sql.NullInt64
	runID, cert, recordSHA, verdict, keyID string
	sig                                    []byte
	prev, hash                             sql.NullString
	serial, operator                       string
	retestOf                               sql.NullString
}

// runs walks the chain of every station (of c.station, if set) in chain order:
// the links, the signatures and the create entries. It reads no record_json:
// the record of each run is decoded once, by rows, which checks it against
// record_sha256 and the runs row.
func (c *chainCheck) runs() error {
	q := `SELECT station, chain_seq, run_id, coalesce(certificate, ''), record_sha256, verdict, key_id, signature,
		chain_prev, chain_hash, serial, operator, retest_of
		FROM runs`
	var args []any
	if c.station != "" {
		q += ` WHERE station = ?`
		args = append(args, c.station)
	}
	q += ` ORDER BY station, chain_seq`
	rows, err := c.tx.QueryContext(c.ctx, q, args...)
	if err != nil {
		return err
	}
	defer rows.Close()
	var cur string
	var curSeq int64
	prev := ""
	first := true
	for rows.Next() {
		var r runRow
		if err := rows.Scan(&r.station, &r.seq, &r.runID, &r.cert, &r.recordSHA, &r.verdict, &r.keyID, &r.sig,
			&r.prev, &r.hash, &r.serial, &r.operator, &r.retestOf); err != nil {
			return err
		}
		if first || r.station != cur {
			if err := c.sinceReached(cur, first, curSeq); err != nil {
				return err
			}
			cur, curSeq, prev, first = r.station, 0, "", false
			c.rep.Stations++
		}
		if trusted, err := c.trusted(&r); err != nil {
			return err
		} else if !trusted {
			if err := c.run(&r, curSeq, prev); err != nil {
				return err
			}
			c.rep.Runs++
		}
		c.rep.Heads[r.station] = r.hash.String
		c.rep.HeadSeqs[r.station] = r.seq.Int64
		curSeq, prev = r.seq.Int64, r.hash.String
	}
	if err := rows.Err(); err != nil {
		return err
	}
	if err := c.sinceReached(cur, first, curSeq); err != nil {
		return err
	}
	for _, k := range slices.Sorted(maps.Keys(c.since)) {
		h := c.since[k]
		_, walked := c.rep.Heads[h.Station]
		if h.Station != "" && !walked && (c.station == "" || c.station == h.Station) {
			return c.broken(h.Station, "", 0, "the saved head of station %q is not on its chain: the ledger has no runs of it, the saved head is run %d (%s)", h.Station, h.Seq, h.Hash)
		}
	}
	return nil
}

// trusted reports whether r is a run trusted through its station's saved head
// (ChainOptions.Since): one up to the head, whose own run must have its hash.
// A trusted run's create entry counts as seen.
func (c *chainCheck) trusted(r *runRow) (bool, error) {
	h, ok := c.since["station "+r.station]
	if !ok || !r.seq.Valid || r.seq.Int64 > h.Seq {
		return false, nil
	}
	if r.seq.Int64 == h.Seq && r.hash.String != h.Hash {
		return false, c.broken(r.station, r.runID, 0, "the saved head of station %q is not on its chain: run %d (%s) has hash %s, the saved head %s: the chain was rebuilt or rewritten",
			r.station, h.Seq, r.runID, r.hash.String, h.Hash)
	}
	if ref := c.creates[r.runID]; ref != nil {
		ref.seen = true
	}
	c.rep.TrustedRuns++
	return true, nil
}

// sinceReached checks, after the runs of station (none yet when first), the last
// at chain position last, that its saved head, if any, was among them.
func (c *chainCheck) sinceReached(station string, first bool, last int64) error {
	if first {
		return nil
	}
	if h, ok := c.since["station "+station]; ok && last < h.Seq {
		return c.broken(station, "", 0, "the saved head of station %q is not on its chain: the chain has %d runs, the saved head is run %d (%s): it was cut back or rebuilt", station, last, h.Seq, h.Hash)
	}
	return nil
}

// sinceFilter is the SQL condition (on a runs row) and its arguments that
// select the runs trusted through a saved head (ChainOptions.Since); "" when
// none are.
func (c *chainCheck) sinceFilter() (string, []any) {
	var when strings.Builder
	var args []any
	for _, k := range slices.Sorted(maps.Keys(c.since)) {
		h := c.since[k]
		if h.Station == "" {
			continue
		}
		when.WriteString(" WHEN ? THEN ?")
		args = append(args, h.Station, h.Seq)
	}
	if len(args) == 0 {
		return "", nil
	}
	return "ifnull(chain_seq <= CASE station" + when.String() + " END, 0)", args
}

// run checks one run's link, the one after (prevSeq, prev) of its station.
func (c *chainCheck) run(r *runRow, prevSeq int64, prev string) error {
	st, id := r.station, r.runID
	fail := func(format string, args ...any) error {
		return c.broken(st, id, 0, "station %q, run %s: %s", st, id, fmt.Sprintf(format, args...))
	}
	if !r.seq.Valid || !r.prev.Valid || !r.hash.Valid {
		return fail("no chain link")
	}
	if r.seq.Int64 != prevSeq+1 {
		return fail("chain position %d follows %d: runs are missing or renumbered", r.seq.Int64, prevSeq)
	}
	if r.prev.String != prev {
		return fail("chain_prev %q is not the previous run's chain_hash %q", r.prev.String, prev)
	}
	if got := chainHash(r.prev.String, r.runID, r.cert, r.recordSHA, r.verdict, r.keyID, r.sig); got != r.hash.String {
		return fail("chain_hash %s, the link computes to %s", r.hash.String, got)
	}
	if err := validateSignature(r.keyID, r.sig); err != nil {
		return fail("%v", err)
	}
	if r.keyID == "" {
		c.rep.Unsigned++
		if c.opt.RequireSignatures {
			return fail("not signed")
		}
	} else {
		c.rep.Signed++
		if c.opt.Verify != nil {
			if !c.opt.Verify(r.keyID, signing.RecordMessage(r.cert, r.runID, r.recordSHA), r.sig) {
				return fail("the signature of key %q does not verify", r.keyID)
			}
			c.rep.Verified++
		}
	}
	ref := c.creates[r.runID]
	if ref == nil {
		return fail("the audit trail has no create entry for it")
	}
	ref.seen = true
	d := ref.create
	for _, f := range []struct{ name, row, trail string }{
		{"station", r.station, d.Station}, {"serial", r.serial, d.Serial}, {"operator", r.operator, d.Operator},
		{"verdict", r.verdict, d.Verdict}, {"certificate", r.cert, d.Certificate}, {"record_sha256", r.recordSHA, d.RecordSHA256},
		{"key_id", r.keyID, d.KeyID}, {"chain_seq", strconv.FormatInt(r.seq.Int64, 10), strconv.FormatInt(d.ChainSeq, 10)},
		{"chain_hash", r.hash.String, d.ChainHash}, {"retest_of", r.retestOf.String, d.RetestOf},
	} {
		if f.row != f.trail {
			return c.broken(st, id, ref.seq, "station %q, run %s: %s is %q, its create entry %d has %q", st, id, f.name, f.row, ref.seq, f.trail)
		}
	}
	for _, b := range d.Blobs {
		if !c.blobSet[b] {
			return c.broken(st, id, ref.seq, "station %q, run %s: blob %s, stored with the run (entry %d), is missing", st, id, b, ref.seq)
		}
	}
	return nil
}

func (c *chainCheck) orphanCreates() error {
	for _, ref := range c.createList {
		if !ref.seen && (c.station == "" || ref.create.Station == c.station) {
			id := ref.subject
			return c.broken(ref.create.Station, id, ref.seq, "audit trail entry %d records run %s of station %q, which is not in the ledger", ref.seq, id, ref.create.Station)
		}
	}
	return nil
}

func (c *chainCheck) certificates() error {
	last := map[string]int64{}
	rows, err := c.tx.QueryContext(c.ctx, `SELECT prefix, last FROM cert_sequences ORDER BY prefix`)
	if err != nil {
		return err
	}
	var prefixes []string
	for rows.Next() {
		var p string
		var n int64
		if err := rows.Scan(&p, &n); err != nil {
			rows.Close()
			return err
		}
		last[p] = n
		prefixes = append(prefixes, p)
	}
	rows.Close()
	if err := rows.Err(); err != nil {
		return err
	}

	c.runCert = map[string]string{}
	used := map[string]map[int64]string{} // prefix -> number -> run id
	rows, err = c.tx.QueryContext(c.ctx, `SELECT certificate, run_id, station FROM runs WHERE certificate IS NOT NULL ORDER BY rowid`)
	if err != nil {
		return err
	}
	defer rows.Close()
	for rows.Next() {
		var cert, id, st string
		if err := rows.Scan(&cert, &id, &st); err != nil {
			return err
		}
		c.runCert[id] = cert
		i := strings.LastIndexByte(cert, '-')
		var n int64 = -1
		if i > 0 && len(cert)-i-1 == 6 && strings.Trim(cert[i+1:], "0123456789") == "" {
			n, _ = strconv.ParseInt(cert[i+1:], 10, 64)
		}
		if n < 0 {
			return c.broken(st, id, 0, "run %s: certificate %q is not PREFIX-NNNNNN", id, cert)
		}
		p := cert[:i]
		top, ok := last[p]
		if !ok {
			return c.broken(st, id, 0, "run %s: certificate %s: prefix %q has no sequence", id, cert, p)
		}
		if n < 1 || n > top {
			return c.broken(st, id, 0, "run %s: certificate %s is outside 1 … %d, the sequence of %s", id, cert, top, p)
		}
		if used[p] == nil {
			used[p] = map[int64]string{}
		}
		if other, dup := used[p][n]; dup {
			return c.broken(st, id, 0, "run %s: certificate %s is also run %s's", id, cert, other)
		}
		used[p][n] = id
		c.rep.Certificates++
	}
	if err := rows.Err(); err != nil {
		return err
	}
	for _, p := range prefixes {
		if int64(len(used[p])) == last[p] {
			continue
		}
		for n := int64(1); n <= last[p]; n++ {
			if _, ok := used[p][n]; !ok {
				return c.broken("", "", 0, "certificate %s-%06d is missing: the sequence of %s is at %d, %d numbers are used", p, n, p, last[p], len(used[p]))
			}
		}
	}
	for _, ref := range c.voidList {
		if c.runCert[ref.void.RunID] != ref.subject {
			return c.broken("", ref.void.RunID, ref.seq, "audit trail entry %d voids %s, which is not the certificate of run %s (%q)",
				ref.seq, ref.subject, ref.void.RunID, c.runCert[ref.void.RunID])
		}
	}
	return c.superseded()
}

// superseded checks every supersede entry: it names the certificate of the
// earlier run, and a retest of that run whose certificate supersedes it; and
// every review decision entry: it names a certified retest of the decided run,
// whose certificate superseded the decided one.
func (c *chainCheck) superseded() error {
	if len(c.superList) == 0 && len(c.reviewList) == 0 {
		return nil
	}
	retestOf := map[string]string{}
	rows, err := c.tx.QueryContext(c.ctx, `SELECT run_id, retest_of FROM runs WHERE retest_of IS NOT NULL`)
	if err != nil {
		return err
	}
	defer rows.Close()
	for rows.Next() {
		var id, of string
		if err := rows.Scan(&id, &of); err != nil {
			return err
		}
		retestOf[id] = of
	}
	if err := rows.Err(); err != nil {
		return err
	}
	for _, ref := range c.reviewList {
		// A review decision is stored with its record, which supersedes the
		// decided certificate (storeReview).
		d, by := ref.review, c.supers[ref.subject]
		switch {
		case c.runCert[d.OfRunID] != ref.subject:
			return c.broken("", d.OfRunID, ref.seq, "audit trail entry %d decides on %s, which is not the certificate of run %s (%q)",
				ref.seq, ref.subject, d.OfRunID, c.runCert[d.OfRunID])
		case d.Certificate == "" || c.runCert[d.RunID] != d.Certificate || retestOf[d.RunID] != d.OfRunID:
			return c.broken("", d.RunID, ref.seq, "audit trail entry %d records a decision on %s by run %s (%s), which is not a certified retest of run %s",
				ref.seq, ref.subject, d.RunID, d.Certificate, d.OfRunID)
		case by == nil || by.super.ByCertificate != d.Certificate:
			return c.broken("", d.RunID, ref.seq, "audit trail entry %d records a decision on %s by %s, which did not supersede it",
				ref.seq, ref.subject, d.Certificate)
		}
	}
	for _, ref := range c.superList {
		d := ref.super
		switch {
		case c.runCert[d.RunID] != ref.subject:
			return c.broken("", d.RunID, ref.seq, "audit trail entry %d supersedes %s, which is not the certificate of run %s (%q)",
				ref.seq, ref.subject, d.RunID, c.runCert[d.RunID])
		case d.ByCertificate == "" || c.runCert[d.ByRunID] != d.ByCertificate:
			return c.broken("", d.ByRunID, ref.seq, "audit trail entry %d supersedes %s by %s, which is not the certificate of run %s (%q)",
				ref.seq, ref.subject, d.ByCertificate, d.ByRunID, c.runCert[d.ByRunID])
		case retestOf[d.ByRunID] != d.RunID:
			return c.broken("", d.ByRunID, ref.seq, "audit trail entry %d supersedes %s by run %s, which is not a retest of run %s",
				ref.seq, ref.subject, d.ByRunID, d.RunID)
		}
	}
	return nil
}

func (c *chainCheck) documents() error {
	rows, err := c.tx.QueryContext(c.ctx, `SELECT `+documentColumns+` FROM documents ORDER BY rowid`)
	if err != nil {
		return err
	}
	defer rows.Close()
	next := map[string]int{}
	for rows.Next() {
		d, err := scanDocument(rows)
		if err != nil {
			return c.broken("", "", 0, "document row %d: %v", c.rep.Documents+1, err)
		}
		list := c.issues[d.Number]
		k := next[d.Number]
		if k >= len(list) {
			return c.broken("", d.RunID, 0, "document %d of certificate %s (%s) has no issue entry in the audit trail", k+1, d.Number, d.Path)
		}
		ref := list[k]
		next[d.Number]++
		is := ref.issue
		for _, f := range []struct{ name, row, trail string }{
			{"run_id", d.RunID, is.RunID}, {"path", d.Path, is.Path}, {"sha256", d.SHA256, is.SHA256},
			{"size", strconv.FormatInt(d.Size, 10), strconv.FormatInt(is.Size, 10)}, {"key_id", d.KeyID, is.KeyID},
			{"signature", hex.EncodeToString(d.Signature), is.Signature}, {"created_at", formatTime(d.CreatedAt), is.CreatedAt},
		} {
			if f.row != f.trail {
				return c.broken("", d.RunID, ref.seq, "document %d of certificate %s: %s is %q, its issue entry %d has %q", k+1, d.Number, f.name, f.row, ref.seq, f.trail)
			}
		}
		if c.runCert[d.RunID] != d.Number {
			return c.broken("", d.RunID, ref.seq, "document %d of certificate %s belongs to run %s, whose certificate is %q", k+1, d.Number, d.RunID, c.runCert[d.RunID])
		}
		c.rep.Documents++
	}
	if err := rows.Err(); err != nil {
		return err
	}
	for _, ref := range c.issueList {
		if ref.idx >= next[ref.subject] {
			return c.broken("", ref.issue.RunID, ref.seq, "audit trail entry %d issued a document of %s (%s) that is not in the ledger", ref.seq, ref.subject, ref.issue.Path)
		}
	}
	return nil
}

// backfillActor is the actor of the audit trail entries migration 0003 writes.
const backfillActor = "trimline migration 0003"

// backfill0003 is migration 0003's Go step: the chain links of the runs stored
// before it, in insertion order (rowid) station by station, unsigned; and a create
// entry in the audit trail for each of them, followed by an issue entry for each of
// its documents.
func backfill0003(ctx context.Context, tx *sql.Tx) error {
	type oldRun struct {
		rowid                                             int64
		id, station, cert, sha, verdict, serial, operator string
	}
	var runs []oldRun
	rows, err := tx.QueryContext(ctx, `SELECT rowid, run_id, station, coalesce(certificate, ''), record_sha256, verdict, serial, operator FROM runs ORDER BY rowid`)
	if err != nil {
		return err
	}
	for rows.Next() {
		var r oldRun
		if err := rows.Scan(&r.rowid, &r.id, &r.station, &r.cert, &r.sha, &r.verdict, &r.serial, &r.operator); err != nil {
			rows.Close()
			return err
		}
		runs = append(runs, r)
	}
	rows.Close()
	if err := rows.Err(); err != nil {
		return err
	}
	docs := map[string][]issueDetail{}
	rows, err = tx.QueryContext(ctx, `SELECT run_id, number, path, sha256, size, created_at FROM documents ORDER BY rowid`)
	if err != nil {
		return err
	}
	numbers := map[string][]string{}
	for rows.Next() {
		var d issueDetail
		var number string
		if err := rows.Scan(&d.RunID, &number, &d.Path, &d.SHA256, &d.Size, &d.CreatedAt); err != nil {
			rows.Close()
			return err
		}
		d.Note = "backfilled by migration 0003"
		docs[d.RunID] = append(docs[d.RunID], d)
		numbers[d.RunID] = append(numbers[d.RunID], number)
	}
	rows.Close()
	if err := rows.Err(); err != nil {
		return err
	}

	at := formatTime(time.Now())
	type tail struct {
		seq  int64
		hash string
	}
	tails := map[string]tail{}
	for _, r := range runs {
		t := tails[r.station]
		link := chainHash(t.hash, r.id, r.cert, r.sha, r.verdict, "", nil)
		if _, err := tx.ExecContext(ctx, `UPDATE runs SET chain_seq = ?, chain_prev = ?, chain_hash = ? WHERE rowid = ?`,
			t.seq+1, t.hash, link, r.rowid); err != nil {
			return fmt.Errorf("run %s: %w", r.id, err)
		}
		detail, err := json.Marshal(createDetail{Station: r.station, Serial: r.serial, Operator: r.operator, Verdict: r.verdict,
			Certificate: r.cert, RecordSHA256: r.sha, ChainSeq: t.seq + 1, ChainHash: link,
			Note: "backfilled by migration 0003: the run was recorded before the audit trail existed"})
		if err != nil {
			return err
		}
		if _, err := appendAudit(ctx, tx, at, backfillActor, ActionCreate, r.id, string(detail)); err != nil {
			return err
		}
		for i, d := range docs[r.id] {
			detail, err := json.Marshal(d)
			if err != nil {
				return err
			}
			if _, err := appendAudit(ctx, tx, at, backfillActor, ActionIssue, numbers[r.id][i], string(detail)); err != nil {
				return err
			}
		}
		delete(docs, r.id)
		tails[r.station] = tail{t.seq + 1, link}
	}
	if len(docs) > 0 {
		return fmt.Errorf("documents of runs that are not in the ledger: %w", ErrCorrupt)
	}
	return nil
}
