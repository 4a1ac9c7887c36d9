-- 0002 uncertainty: measurement uncertainty of every result, the decision rule of
-- every toleranced limit, the coverage probability and the ambient conditions of a
-- run, and the REVIEW verdict.
--
-- As in 0001, a REAL column is NULL where the value is not a finite number, and
-- runs.record_json holds every value exactly (an infinite dof is the JSON string
-- "Infinity" there). Migrations run with foreign_keys off and must leave
-- PRAGMA foreign_key_check empty (migrate.go checks it before committing).

-- results: the uncertainty of each result, in the SI unit of its value.
-- All five columns are NULL when the uncertainty was not evaluated (the record's
-- zero Uncertainty: old records, and trim codes, which are exact). Otherwise:
--   dof IS NULL means infinitely many effective degrees of freedom (every
--   contribution had infinite dof), the record's math.Inf(1). A finite dof is
--   stored as it is.
ALTER TABLE results ADD COLUMN u REAL;          -- standard uncertainty u
ALTER TABLE results ADD COLUMN dof REAL;        -- effective degrees of freedom; NULL = infinite (when u is not NULL)
ALTER TABLE results ADD COLUMN k REAL;          -- coverage factor
ALTER TABLE results ADD COLUMN expanded_u REAL; -- expanded uncertainty U = k·u
ALTER TABLE results ADD COLUMN method TEXT;     -- "GUM" or "MC"; NULL when not stated

-- limit_outcomes: the decision-rule evaluation of a toleranced limit, every number
-- in the limit's unit. All NULL for an expression limit (no decision).
-- lower/upper and accept_lower/accept_upper are NULL on an unbounded side.
ALTER TABLE limit_outcomes ADD COLUMN rule TEXT;          -- "simple" or "guarded"
ALTER TABLE limit_outcomes ADD COLUMN guard_factor REAL;  -- r
ALTER TABLE limit_outcomes ADD COLUMN guard REAL;         -- w = r·U
ALTER TABLE limit_outcomes ADD COLUMN lower REAL;         -- lower tolerance limit
ALTER TABLE limit_outcomes ADD COLUMN upper REAL;         -- upper tolerance limit
ALTER TABLE limit_outcomes ADD COLUMN accept_lower REAL;  -- lower acceptance limit
ALTER TABLE limit_outcomes ADD COLUMN accept_upper REAL;  -- upper acceptance limit
ALTER TABLE limit_outcomes ADD COLUMN zone TEXT;          -- "pass", "conditional pass", "conditional fail", "fail"
ALTER TABLE limit_outcomes ADD COLUMN p_outside REAL;     -- probability the true value is outside the tolerance
ALTER TABLE limit_outcomes ADD COLUMN tur REAL;           -- test uncertainty ratio; NULL when one-sided or undefined (0 in the record)
ALTER TABLE limit_outcomes ADD COLUMN tur_low INTEGER;    -- 0 or 1
ALTER TABLE limit_outcomes ADD COLUMN binary INTEGER;     -- 0 or 1: binary (pass/fail) or non-binary statement
ALTER TABLE limit_outcomes ADD COLUMN statement TEXT;     -- the decision rule and its outcome in words

-- runs: rebuilt (SQLite's table-rebuild procedure) because the verdict CHECK gains
-- REVIEW, and a REVIEW run, measured completely, gets a certificate number like
-- PASS and FAIL. New columns:
--   coverage       coverage probability of every expanded uncertainty (e.g. 0.9545); NULL when not recorded
--   ambient_c      ambient temperature, °C; NULL when not recorded
--   ambient_source "entered" or "sensor"; NULL when not recorded
CREATE TABLE runs_new (
    run_id         TEXT PRIMARY KEY,
    serial         TEXT NOT NULL REFERENCES units (serial),
    product        TEXT NOT NULL,
    revision       TEXT NOT NULL,
    station        TEXT NOT NULL,
    operator       TEXT NOT NULL,
    software       TEXT NOT NULL,
    started        TEXT NOT NULL,
    finished       TEXT NOT NULL,
    verdict        TEXT NOT NULL CHECK (verdict IN ('PASS', 'FAIL', 'REVIEW', 'FAULT', 'ABORTED')),
    fault          TEXT,                  -- NULL when the record has no fault message
    reasons        TEXT NOT NULL,         -- JSON array of strings
    certificate    TEXT UNIQUE,           -- NULL for FAULT and ABORTED
    record_json    TEXT NOT NULL,         -- canonical JSON of the whole record
    record_sha256  TEXT NOT NULL,         -- lowercase hex SHA-256 of record_json's bytes
    coverage       REAL,
    ambient_c      REAL,
    ambient_source TEXT,
    CHECK ((verdict IN ('PASS', 'FAIL', 'REVIEW')) = (certificate IS NOT NULL))
) STRICT;

INSERT INTO runs_new (run_id, serial, product, revision, station, operator, software, started, finished,
        verdict, fault, reasons, certificate, record_json, record_sha256)
    SELECT run_id, serial, product, revision, station, operator, software, started, finished,
        verdict, fault, reasons, certificate, record_json, record_sha256
    FROM runs;

DROP TABLE runs;
ALTER TABLE runs_new RENAME TO runs;

CREATE INDEX runs_serial_started ON runs (serial, started);
CREATE INDEX runs_started ON runs (started);

CREATE TRIGGER runs_no_update BEFORE UPDATE ON runs BEGIN SELECT RAISE(ABORT, 'ledger: runs are append-only'); END;
CREATE TRIGGER runs_no_delete BEFORE DELETE ON runs BEGIN SELECT RAISE(ABORT, 'ledger: runs are append-only'); END;
