-- 0009 channels: units with several channels. A per-channel step's rows carry
-- the channel they belong to, so a query can ask by channel ("channel 2's
-- as-left offset of every unit of product X"); a record's result or limit
-- outcome is unique by name and channel together.
--
-- channel is the record's Channel as written: '' for a result, outcome, fit,
-- trim, sweep, reading or step of the whole unit, which every record made
-- before channels is; so the default is the value of every existing row and
-- no backfill is needed.
--
-- A station binds a switch (kind 'switch') to route the channels: the
-- instruments table is rebuilt with that kind allowed (SQLite cannot change a
-- CHECK in place). Rows keep their rowid, so their order is the stored order.

ALTER TABLE results ADD COLUMN channel TEXT NOT NULL DEFAULT '';
ALTER TABLE limit_outcomes ADD COLUMN channel TEXT NOT NULL DEFAULT '';
ALTER TABLE fits ADD COLUMN channel TEXT NOT NULL DEFAULT '';
ALTER TABLE trims ADD COLUMN channel TEXT NOT NULL DEFAULT '';
ALTER TABLE sweeps ADD COLUMN channel TEXT NOT NULL DEFAULT '';
ALTER TABLE readings ADD COLUMN channel TEXT NOT NULL DEFAULT '';
ALTER TABLE steps ADD COLUMN channel TEXT NOT NULL DEFAULT '';

CREATE TABLE instruments_switch (
    run_id   TEXT NOT NULL REFERENCES runs (run_id),
    role     TEXT NOT NULL,
    address  TEXT NOT NULL,
    asset    TEXT NOT NULL,
    cal_due  TEXT NOT NULL,               -- YYYY-MM-DD
    identity TEXT NOT NULL,               -- maker,model,serial,firmware
    kind     TEXT CHECK (kind IN ('voltage_source', 'meter', 'dut_port', 'switch'))
) STRICT;

INSERT INTO instruments_switch (rowid, run_id, role, address, asset, cal_due, identity, kind)
    SELECT rowid, run_id, role, address, asset, cal_due, identity, kind FROM instruments ORDER BY rowid;

DROP TRIGGER instruments_no_update;
DROP TRIGGER instruments_no_delete;
DROP TABLE instruments;
ALTER TABLE instruments_switch RENAME TO instruments;

CREATE TRIGGER instruments_no_update BEFORE UPDATE ON instruments BEGIN SELECT RAISE(ABORT, 'ledger: instruments are append-only'); END;
CREATE TRIGGER instruments_no_delete BEFORE DELETE ON instruments BEGIN SELECT RAISE(ABORT, 'ledger: instruments are append-only'); END;
