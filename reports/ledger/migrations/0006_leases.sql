-- 0006 leases: a run being published is held by the process publishing it. The
-- process takes the lease before it stores the run and gives it back after the
-- certificate's document and seal are written; while it works it renews the
-- expiry. A start-up repair publishes again only runs whose lease is gone, expired,
-- or held by a process that no longer exists, so it never redoes the work of a
-- station that is still running, its own or another's.
--
-- A lease is not a record: it is not covered by the hash chain, the signatures or
-- the audit trail, and it may be updated and deleted. Nothing recorded changes.
CREATE TABLE leases (
    run_id     TEXT PRIMARY KEY,
    host       TEXT NOT NULL,
    pid        INTEGER NOT NULL,
    started_at TEXT NOT NULL,
    expires_at TEXT NOT NULL
) STRICT;
