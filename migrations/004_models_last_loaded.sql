-- When each bundle was last loaded, so that a report on a model by name uses the bundle that
-- serves it now, also after a rollback to an older version.
ALTER TABLE models ADD COLUMN last_loaded_at INTEGER NOT NULL DEFAULT 0;
UPDATE models SET last_loaded_at = first_loaded_at;
