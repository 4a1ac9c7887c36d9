-- 0004 imports: runs of other stations, imported from their archive bundles
-- (reports/bundle) so that an auditor can keep and replay them on another machine.
--
-- An imported run is another station's record. It is kept apart from this
-- station's own runs: it has no link in any local hash chain, takes no local
-- certificate number and adds no rows to units, readings, results, ... (its
-- record_json holds all of it). The contents of its files in force, its PDF, its
-- seal and its public key go into blobs like every other content (insert or
-- ignore). Each import is an audit trail entry "import" (subject: the run id).
-- See imports.go.
CREATE TABLE imported_runs (
    run_id            TEXT PRIMARY KEY CHECK (run_id <> ''),
    number            TEXT NOT NULL,                       -- the certificate number the source station issued; '' for none
    station           TEXT NOT NULL,                       -- the source station (the record's station)
    serial            TEXT NOT NULL CHECK (serial <> ''),
    record_json       TEXT NOT NULL,                       -- canonical JSON of the record, byte for byte as the source kept it
    record_sha256     TEXT NOT NULL CHECK (length(record_sha256) = 64),
    key_id            TEXT NOT NULL DEFAULT '',            -- key that signed the run at the source; '' when unsigned
    signature         BLOB NOT NULL DEFAULT x''            -- over SignedMessage(number, run_id, record_sha256)
        CHECK ((key_id = '') = (length(signature) = 0)),
    pdf_sha256        TEXT REFERENCES blobs (sha256),      -- the certificate PDF; NULL when not imported
    seal_sha256       TEXT REFERENCES blobs (sha256),      -- its seal (JSON); NULL when not imported
    public_key_sha256 TEXT REFERENCES blobs (sha256),      -- the source's public key (PEM); NULL when not imported
    imported_at       TEXT NOT NULL,                       -- UTC, nine fractional digits
    imported_by       TEXT NOT NULL CHECK (imported_by <> ''),
    source            TEXT NOT NULL                        -- where it came from (the bundle's SHA-256, a file name)
) STRICT;

CREATE UNIQUE INDEX imported_runs_number ON imported_runs (number) WHERE number <> '';

CREATE TRIGGER imported_runs_no_update BEFORE UPDATE ON imported_runs BEGIN SELECT RAISE(ABORT, 'ledger: imported runs are append-only'); END;
CREATE TRIGGER imported_runs_no_delete BEFORE DELETE ON imported_runs BEGIN SELECT RAISE(ABORT, 'ledger: imported runs are append-only'); END;
