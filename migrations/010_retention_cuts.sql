-- "Checkpoint" names SQLite's WAL checkpoints; the records retention writes before it deletes the
-- oldest rows (the seq and chain hash of the last row removed) are retention cuts from here on.
ALTER TABLE chain_checkpoints RENAME TO retention_cuts;
