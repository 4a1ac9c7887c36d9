-- 0001 init: the station ledger.
--
-- Times are TEXT, RFC 3339 in UTC with exactly nine fractional digits
-- ("2006-01-02T15:04:05.000000000Z"), so that they sort as text.
-- REAL columns hold NULL where the value is not a finite number (NaN, ±Inf);
-- runs.record_json holds every value exactly.
-- Run data is append-only: triggers refuse UPDATE and DELETE.

CREATE TABLE units (
    serial     TEXT PRIMARY KEY,
    product    TEXT NOT NULL,
    first_seen TEXT NOT NULL,
    last_seen  TEXT NOT NULL
) STRICT;

CREATE TABLE runs (
    run_id        TEXT PRIMARY KEY,
    serial        TEXT NOT NULL REFERENCES units (serial),
    product       TEXT NOT NULL,
    revision      TEXT NOT NULL,
    station       TEXT NOT NULL,
    operator      TEXT NOT NULL,
    software      TEXT NOT NULL,
    started       TEXT NOT NULL,
    finished      TEXT NOT NULL,
    verdict       TEXT NOT NULL CHECK (verdict IN ('PASS', 'FAIL', 'FAULT', 'ABORTED')),
    fault         TEXT,                   -- NULL when the record has no fault message
    reasons       TEXT NOT NULL,          -- JSON array of strings
    certificate   TEXT UNIQUE,            -- NULL for FAULT and ABORTED
    record_json   TEXT NOT NULL,          -- canonical JSON of the whole record
    record_sha256 TEXT NOT NULL,          -- lowercase hex SHA-256 of record_json's bytes
    CHECK ((verdict IN ('PASS', 'FAIL')) = (certificate IS NOT NULL))
) STRICT;

CREATE INDEX runs_serial_started ON runs (serial, started);
CREATE INDEX runs_started ON runs (started);

CREATE TABLE readings (
    run_id        TEXT NOT NULL REFERENCES runs (run_id),
    sweep         TEXT NOT NULL,          -- sweep name, e.g. "pre-trim"
    point_index   INTEGER NOT NULL,       -- 0-based within the sweep
    reading_index INTEGER NOT NULL,       -- 0-based within the point
    stimulus_v    REAL,                   -- programmed source level, V
    value_v       REAL,                   -- meter reading, V
    flag          TEXT NOT NULL,          -- "ok", "overload", "nan"
    taken_at      TEXT NOT NULL
) STRICT;

CREATE INDEX readings_run ON readings (run_id);

CREATE TABLE results (
    run_id TEXT NOT NULL REFERENCES runs (run_id),
    name   TEXT NOT NULL,
    value  REAL,                          -- SI base units
    unit   TEXT NOT NULL,
    valid  INTEGER NOT NULL,              -- 0 or 1
    note   TEXT NOT NULL
) STRICT;

CREATE TABLE limit_outcomes (
    run_id      TEXT NOT NULL REFERENCES runs (run_id),
    name        TEXT NOT NULL,
    expr        TEXT NOT NULL,
    unit        TEXT NOT NULL,
    pass        INTEGER NOT NULL,         -- 0 or 1
    reason      TEXT NOT NULL,
    values_json TEXT NOT NULL             -- JSON object, each used result in the limit's unit
) STRICT;

CREATE TABLE fits (
    run_id        TEXT NOT NULL REFERENCES runs (run_id),
    sweep         TEXT NOT NULL,
    slope         REAL,                   -- V/V
    intercept_v   REAL,                   -- V
    residual_sd_v REAL,                   -- V
    dof           INTEGER NOT NULL,
    nonlinearity  REAL,                   -- fraction of full scale
    cov_json      TEXT NOT NULL           -- JSON [[a,b],[c,d]], covariance of (intercept, slope)
) STRICT;

CREATE TABLE trims (
    run_id      TEXT NOT NULL REFERENCES runs (run_id),
    dac         TEXT NOT NULL,
    before_code INTEGER NOT NULL,
    code        INTEGER NOT NULL,
    ideal       REAL,
    readback    INTEGER NOT NULL,
    saturated   INTEGER NOT NULL,         -- 0 or 1
    stored      INTEGER NOT NULL          -- 0 or 1
) STRICT;

CREATE TABLE files (
    run_id TEXT NOT NULL REFERENCES runs (run_id),
    kind   TEXT NOT NULL,
    name   TEXT NOT NULL,
    title  TEXT NOT NULL,
    sha256 TEXT NOT NULL
) STRICT;

CREATE TABLE instruments (
    run_id   TEXT NOT NULL REFERENCES runs (run_id),
    role     TEXT NOT NULL,
    address  TEXT NOT NULL,
    asset    TEXT NOT NULL,
    cal_due  TEXT NOT NULL,               -- YYYY-MM-DD
    identity TEXT NOT NULL                -- maker,model,serial,firmware
) STRICT;

CREATE TABLE documents (
    run_id     TEXT NOT NULL REFERENCES runs (run_id),
    number     TEXT NOT NULL,
    path       TEXT NOT NULL,
    sha256     TEXT NOT NULL,             -- lowercase hex SHA-256 of the document's bytes
    size       INTEGER NOT NULL CHECK (size >= 0), -- bytes
    created_at TEXT NOT NULL
) STRICT;

CREATE INDEX documents_run ON documents (run_id);

CREATE TABLE cert_sequences (
    prefix TEXT PRIMARY KEY,
    last   INTEGER NOT NULL CHECK (last >= 0) -- last number issued under prefix
) STRICT;

CREATE TRIGGER runs_no_update BEFORE UPDATE ON runs BEGIN SELECT RAISE(ABORT, 'ledger: runs are append-only'); END;
CREATE TRIGGER runs_no_delete BEFORE DELETE ON runs BEGIN SELECT RAISE(ABORT, 'ledger: runs are append-only'); END;
CREATE TRIGGER readings_no_update BEFORE UPDATE ON readings BEGIN SELECT RAISE(ABORT, 'ledger: readings are append-only'); END;
CREATE TRIGGER readings_no_delete BEFORE DELETE ON readings BEGIN SELECT RAISE(ABORT, 'ledger: readings are append-only'); END;
CREATE TRIGGER results_no_update BEFORE UPDATE ON results BEGIN SELECT RAISE(ABORT, 'ledger: results are append-only'); END;
CREATE TRIGGER results_no_delete BEFORE DELETE ON results BEGIN SELECT RAISE(ABORT, 'ledger: results are append-only'); END;
CREATE TRIGGER limit_outcomes_no_update BEFORE UPDATE ON limit_outcomes BEGIN SELECT RAISE(ABORT, 'ledger: limit outcomes are append-only'); END;
CREATE TRIGGER limit_outcomes_no_delete BEFORE DELETE ON limit_outcomes BEGIN SELECT RAISE(ABORT, 'ledger: limit outcomes are append-only'); END;
CREATE TRIGGER fits_no_update BEFORE UPDATE ON fits BEGIN SELECT RAISE(ABORT, 'ledger: fits are append-only'); END;
CREATE TRIGGER fits_no_delete BEFORE DELETE ON fits BEGIN SELECT RAISE(ABORT, 'ledger: fits are append-only'); END;
CREATE TRIGGER trims_no_update BEFORE UPDATE ON trims BEGIN SELECT RAISE(ABORT, 'ledger: trims are append-only'); END;
CREATE TRIGGER trims_no_delete BEFORE DELETE ON trims BEGIN SELECT RAISE(ABORT, 'ledger: trims are append-only'); END;
CREATE TRIGGER files_no_update BEFORE UPDATE ON files BEGIN SELECT RAISE(ABORT, 'ledger: files are append-only'); END;
CREATE TRIGGER files_no_delete BEFORE DELETE ON files BEGIN SELECT RAISE(ABORT, 'ledger: files are append-only'); END;
CREATE TRIGGER instruments_no_update BEFORE UPDATE ON instruments BEGIN SELECT RAISE(ABORT, 'ledger: instruments are append-only'); END;
CREATE TRIGGER instruments_no_delete BEFORE DELETE ON instruments BEGIN SELECT RAISE(ABORT, 'ledger: instruments are append-only'); END;
CREATE TRIGGER documents_no_update BEFORE UPDATE ON documents BEGIN SELECT RAISE(ABORT, 'ledger: documents are append-only'); END;
CREATE TRIGGER documents_no_delete BEFORE DELETE ON documents BEGIN SELECT RAISE(ABORT, 'ledger: documents are append-only'); END;
CREATE TRIGGER cert_sequences_no_delete BEFORE DELETE ON cert_sequences BEGIN SELECT RAISE(ABORT, 'ledger: certificate sequences are never reset'); END;
CREATE TRIGGER cert_sequences_no_decrease BEFORE UPDATE ON cert_sequences WHEN NEW.last <> OLD.last + 1 OR NEW.prefix <> OLD.prefix
    BEGIN SELECT RAISE(ABORT, 'ledger: a certificate sequence only steps by one'); END;
