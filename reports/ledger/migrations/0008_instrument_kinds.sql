-- 0008 instrument kinds: each instruments row carries the kind of instrument
-- its role binds, so a query can ask by kind whatever the station named the
-- role ("every meter used on product X", with roles such as dmm or dmm2).
--
-- Kinds are written as the record writes them: 'voltage_source', 'meter',
-- 'dut_port'. Records of schema 1 carry no kinds; their roles were always
-- source, meter and dut, and their rows get the kind of the same name, exactly
-- as sequencer's InstrumentRef.RoleKind derives it. NULL only where a record
-- says neither (no kind and a role of another name).
--
-- This migration has two parts. Between them (at the "trimline:backfill"
-- line) migrate.go runs a Go step in the same transaction (backfill0008): it
-- decodes every stored record and fills the new column of its instruments rows
-- with what recordRows derives from it, the same function that writes a new
-- run's rows and that VerifyChain checks them with.

ALTER TABLE instruments ADD COLUMN kind TEXT CHECK (kind IN ('voltage_source', 'meter', 'dut_port'));

-- The backfill updates instruments; its append-only trigger comes back in
-- part two.
DROP TRIGGER instruments_no_update;

-- trimline:backfill

CREATE TRIGGER instruments_no_update BEFORE UPDATE ON instruments BEGIN SELECT RAISE(ABORT, 'ledger: instruments are append-only'); END;
