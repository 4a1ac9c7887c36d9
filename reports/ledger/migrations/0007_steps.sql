-- 0007 steps: the query rows carry what records of schema 2 say about the
-- sequence's steps, so a query can ask by stage and by step ("units where the
-- store step was skipped", "every as-left result of product X").
--
-- Stages are written as the record writes them: 'as_found', 'adjustment',
-- 'as_left'; NULL where the record gives none. Records of schema 1 (made with
-- the first sequence layout, before steps) carry no stages; their rows get the
-- stages that layout stands for, by name, exactly as sequencer's StageOf
-- derives them: results pre_* as_found, offset_code and gain_code adjustment,
-- post_* as_left; sweeps "pre-trim" as_found, "verify" as_left. Their fits
-- were all straight lines: fit_order 1. They name no steps (step is NULL) and
-- have no step log (no steps rows).
--
-- This migration has two parts. Between them (at the "trimline:backfill"
-- line) migrate.go runs a Go step in the same transaction (backfill0007): it
-- decodes every stored record and fills the new columns of its results and
-- fits rows and its sweeps and steps rows with what recordRows derives from
-- it, the same function that writes a new run's rows and that VerifyChain
-- checks them with, so old and new rows query alike and check alike.

-- results: the stage of the result and the step that computed it.
ALTER TABLE results ADD COLUMN stage TEXT CHECK (stage IN ('as_found', 'adjustment', 'as_left'));
ALTER TABLE results ADD COLUMN step TEXT;            -- NULL in records of schema 1

-- fits: the fit step, the model's order and its lack of fit.
ALTER TABLE fits ADD COLUMN step TEXT;               -- NULL in records of schema 1
ALTER TABLE fits ADD COLUMN fit_order INTEGER CHECK (fit_order IN (1, 2)); -- 1 a line, 2 a quadratic
ALTER TABLE fits ADD COLUMN coef_json TEXT;          -- order 2: JSON [b0, b1, b2] (V, V/V, 1/V); NULL for a line
ALTER TABLE fits ADD COLUMN lack_of_fit_method TEXT; -- "chi2/dof" or "F"; NULL when not evaluated
ALTER TABLE fits ADD COLUMN lack_of_fit REAL;        -- the statistic
ALTER TABLE fits ADD COLUMN lack_of_fit_p REAL;      -- probability of a statistic this large from a model that fits

-- sweeps: one row per sweep of a run, in the record's order; its readings are
-- the readings rows of the same run and sweep name.
CREATE TABLE sweeps (
    run_id TEXT NOT NULL REFERENCES runs (run_id),
    sweep  TEXT NOT NULL,                -- the sweep step's name, e.g. "pre-trim"
    stage  TEXT CHECK (stage IN ('as_found', 'adjustment', 'as_left')),
    points INTEGER NOT NULL CHECK (points >= 0)
) STRICT;

CREATE INDEX sweeps_run ON sweeps (run_id);

-- steps: the record's step log, one row per step of the sequence, in order.
CREATE TABLE steps (
    run_id     TEXT NOT NULL REFERENCES runs (run_id),
    step_index INTEGER NOT NULL CHECK (step_index >= 0), -- 0-based position in the sequence
    name       TEXT NOT NULL,
    kind       TEXT NOT NULL,            -- the registered step kind, e.g. "sweep"
    stage      TEXT CHECK (stage IN ('as_found', 'adjustment', 'as_left')),
    status     TEXT NOT NULL,            -- "done", "skipped", "not reached"
    note       TEXT                      -- why it was skipped or not reached; NULL when none
) STRICT;

CREATE INDEX steps_run ON steps (run_id);
CREATE INDEX steps_name_status ON steps (name, status);

CREATE TRIGGER sweeps_no_update BEFORE UPDATE ON sweeps BEGIN SELECT RAISE(ABORT, 'ledger: sweeps are append-only'); END;
CREATE TRIGGER sweeps_no_delete BEFORE DELETE ON sweeps BEGIN SELECT RAISE(ABORT, 'ledger: sweeps are append-only'); END;
CREATE TRIGGER steps_no_update BEFORE UPDATE ON steps BEGIN SELECT RAISE(ABORT, 'ledger: steps are append-only'); END;
CREATE TRIGGER steps_no_delete BEFORE DELETE ON steps BEGIN SELECT RAISE(ABORT, 'ledger: steps are append-only'); END;

-- The backfill updates results and fits; their append-only triggers come back
-- in part two.
DROP TRIGGER results_no_update;
DROP TRIGGER fits_no_update;

-- trimline:backfill

CREATE TRIGGER results_no_update BEFORE UPDATE ON results BEGIN SELECT RAISE(ABORT, 'ledger: results are append-only'); END;
CREATE TRIGGER fits_no_update BEFORE UPDATE ON fits BEGIN SELECT RAISE(ABORT, 'ledger: fits are append-only'); END;
