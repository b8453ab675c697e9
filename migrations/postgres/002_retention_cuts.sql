-- The records retention writes before it deletes the oldest rows (the seq and chain hash of the
-- last row removed) are retention cuts, as in the SQLite store (its migration 010); "checkpoint"
-- is left to the database's own checkpoints.
ALTER TABLE chain_checkpoints RENAME TO retention_cuts;
