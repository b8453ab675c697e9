-- Drift reports need the training reference of the bundle that answered, even after it is
-- unloaded: keep the sealed bundle itself with its model row (once per sha256).
ALTER TABLE models ADD COLUMN bundle TEXT;

CREATE TABLE drift_reports (
  id            TEXT PRIMARY KEY,       -- UUID v7
  seq           INTEGER NOT NULL UNIQUE,
  model_name    TEXT NOT NULL,
  model_sha256  TEXT NOT NULL,
  window_from   INTEGER NOT NULL,       -- Unix ms, inclusive
  window_to     INTEGER NOT NULL,       -- Unix ms, exclusive
  created_at    INTEGER NOT NULL,
  trigger       TEXT NOT NULL CHECK (trigger IN ('nightly', 'request', 'cli', 'demo')),
  report        TEXT NOT NULL           -- the report JSON
) STRICT;

CREATE INDEX drift_reports_model_window ON drift_reports (model_name, window_from);
