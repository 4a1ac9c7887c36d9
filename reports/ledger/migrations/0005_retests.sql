-- 0005 retests: a run of a serial that already has a measured run (PASS, FAIL or
-- REVIEW; engineering runs counted among engineering runs only) is a retest, and
-- names the run it repeats. The link is also in the run's record_json (its
-- "retest_of"), so it is covered by the record's hash, signature and chain link;
-- the column repeats it for queries, and VerifyChain checks that both agree.
--
-- When a retest is certified, the certificate of the run it repeats is superseded:
-- an audit trail entry "supersede" (subject: the old certificate number), written
-- in the transaction that records the retest, so a serial never holds two current
-- certificates. Nothing recorded before this migration changes: older runs have
-- no link (NULL) and their certificates keep the status they had.
ALTER TABLE runs ADD COLUMN retest_of TEXT REFERENCES runs (run_id) CHECK (retest_of <> run_id);

CREATE INDEX runs_retest_of ON runs (retest_of);
