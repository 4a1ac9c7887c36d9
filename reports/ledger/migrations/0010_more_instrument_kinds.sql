-- 0010 more instrument kinds: a station may bind a current source (kind
-- 'current_source', a stimulus that is a current) and a temperature chamber
-- (kind 'thermal'). The instruments table is rebuilt with those kinds allowed
-- (SQLite cannot change a CHECK in place). Rows keep their rowid, so their order
-- is the stored order.

CREATE TABLE instruments_kinds (
    run_id   TEXT NOT NULL REFERENCES runs (run_id),
    role     TEXT NOT NULL,
    address  TEXT NOT NULL,
    asset    TEXT NOT NULL,
    cal_due  TEXT NOT NULL,               -- YYYY-MM-DD
    identity TEXT NOT NULL,               -- maker,model,serial,firmware
    kind     TEXT CHECK (kind IN ('voltage_source', 'current_source', 'meter', 'dut_port', 'switch', 'thermal'))
) STRICT;

INSERT INTO instruments_kinds (rowid, run_id, role, address, asset, cal_due, identity, kind)
    SELECT rowid, run_id, role, address, asset, cal_due, identity, kind FROM instruments ORDER BY rowid;

DROP TRIGGER instruments_no_update;
DROP TRIGGER instruments_no_delete;
DROP TABLE instruments;
ALTER TABLE instruments_kinds RENAME TO instruments;

CREATE TRIGGER instruments_no_update BEFORE UPDATE ON instruments BEGIN SELECT RAISE(ABORT, 'ledger: instruments are append-only'); END;
CREATE TRIGGER instruments_no_delete BEFORE DELETE ON instruments BEGIN SELECT RAISE(ABORT, 'ledger: instruments are append-only'); END;
