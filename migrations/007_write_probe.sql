-- The row readiness writes to learn whether the database can still be written
-- (src/store/write-health.ts): taking the write lock succeeds on a full disk or an immutable file,
-- where every commit fails.

CREATE TABLE write_probe (
  id INTEGER PRIMARY KEY CHECK (id = 1),
  at INTEGER NOT NULL                      -- Unix ms of the last test write
) STRICT;
