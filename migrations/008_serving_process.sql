-- The process serving this database. At most one process serves a SQLite file: it holds the lock
-- file beside it (src/store/serve-lock.ts) and writes who it is here, so that a second one can
-- say who holds it.

CREATE TABLE serving_process (
  id         INTEGER PRIMARY KEY CHECK (id = 1),
  pid        INTEGER NOT NULL,
  host       TEXT NOT NULL,
  version    TEXT NOT NULL,
  started_at INTEGER NOT NULL              -- Unix ms
) STRICT;
