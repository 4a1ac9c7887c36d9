-- 0003 tamper evidence: signatures and a hash chain per station on runs, signed
-- documents, content-addressed copies of the files in force (blobs), and an
-- append-only, hash-chained audit trail.
--
-- This migration has two parts. Between them (at the "trimline:backfill" line)
-- migrate.go runs a Go step in the same transaction: it computes chain_seq,
-- chain_prev and chain_hash of every existing run in insertion order (rowid),
-- station by station, with an empty key_id and signature, and writes an audit
-- trail entry "create" for every existing run and "issue" for every existing
-- document, in insertion order. See chain.go and audit.go for the exact bytes
-- that are hashed.

-- runs: the signature over SignedMessage(certificate, run_id, record_sha256) and
-- the run's link in the hash chain of its station.
ALTER TABLE runs ADD COLUMN key_id TEXT NOT NULL DEFAULT '';  -- key that signed the run; '' when unsigned
ALTER TABLE runs ADD COLUMN signature BLOB NOT NULL DEFAULT x'' -- empty when unsigned
    CHECK ((key_id = '') = (length(signature) = 0));
ALTER TABLE runs ADD COLUMN chain_seq INTEGER CHECK (chain_seq >= 1);    -- 1-based position in the station's chain
ALTER TABLE runs ADD COLUMN chain_prev TEXT;                             -- chain_hash of the station's previous run; '' for the first
ALTER TABLE runs ADD COLUMN chain_hash TEXT CHECK (length(chain_hash) = 64); -- lowercase hex SHA-256 of the chain line

-- The backfill updates runs; the append-only trigger comes back in part two.
DROP TRIGGER runs_no_update;

-- documents: the signature of the document, as the issuer made it (the ledger
-- stores it; what it covers is the issuer's business).
ALTER TABLE documents ADD COLUMN key_id TEXT NOT NULL DEFAULT '';
ALTER TABLE documents ADD COLUMN signature BLOB NOT NULL DEFAULT x''
    CHECK ((key_id = '') = (length(signature) = 0));

CREATE INDEX documents_number ON documents (number);
CREATE INDEX documents_sha256 ON documents (sha256);

-- blobs: the exact bytes of the files in force (station, sequence, limits), keyed by
-- their SHA-256, stored once however many runs used them.
CREATE TABLE blobs (
    sha256 TEXT PRIMARY KEY CHECK (length(sha256) = 64), -- lowercase hex SHA-256 of data
    size   INTEGER NOT NULL CHECK (size >= 0),           -- bytes
    data   BLOB NOT NULL
) STRICT;

-- audit_trail: who did what to which record, when (21 CFR 11.10(e)). Entries are
-- only appended; each hash covers the previous entry's hash, so a changed or removed
-- entry breaks the chain from there on.
CREATE TABLE audit_trail (
    seq       INTEGER PRIMARY KEY CHECK (seq >= 1), -- 1, 2, 3, ... without gaps
    at        TEXT NOT NULL,                        -- when, UTC, nine fractional digits
    actor     TEXT NOT NULL CHECK (actor <> ''),   -- who
    action    TEXT NOT NULL CHECK (action <> ''),  -- "create", "issue", "void", or another part's word
    subject   TEXT NOT NULL,                        -- run id (create) or certificate number (issue, void)
    detail    TEXT NOT NULL,                        -- JSON object for create/issue/void, free text otherwise
    prev_hash TEXT NOT NULL,                        -- hash of entry seq - 1; '' for the first
    hash      TEXT NOT NULL UNIQUE CHECK (length(hash) = 64)
) STRICT;

CREATE INDEX audit_trail_subject ON audit_trail (subject, action);

CREATE TRIGGER blobs_no_update BEFORE UPDATE ON blobs BEGIN SELECT RAISE(ABORT, 'ledger: blobs are append-only'); END;
CREATE TRIGGER blobs_no_delete BEFORE DELETE ON blobs BEGIN SELECT RAISE(ABORT, 'ledger: blobs are append-only'); END;
CREATE TRIGGER audit_trail_no_update BEFORE UPDATE ON audit_trail BEGIN SELECT RAISE(ABORT, 'ledger: the audit trail is append-only'); END;
CREATE TRIGGER audit_trail_no_delete BEFORE DELETE ON audit_trail BEGIN SELECT RAISE(ABORT, 'ledger: the audit trail is append-only'); END;

-- trimline:backfill

CREATE UNIQUE INDEX runs_station_chain ON runs (station, chain_seq);

CREATE TRIGGER runs_no_update BEFORE UPDATE ON runs BEGIN SELECT RAISE(ABORT, 'ledger: runs are append-only'); END;
CREATE TRIGGER runs_chain_required BEFORE INSERT ON runs
    WHEN NEW.chain_seq IS NULL OR NEW.chain_prev IS NULL OR NEW.chain_hash IS NULL
    BEGIN SELECT RAISE(ABORT, 'ledger: a run needs its link in the hash chain'); END;
