-- Whether the answer carried an explanation (issue 18): 1 or 0 for rows written from this
-- migration on, NULL for the rows before it. A row with a value seals it into its chain hash
-- (src/store/chain.ts); a NULL adds nothing, so the rows sealed before keep their hashes.
ALTER TABLE scored_requests ADD COLUMN explained INTEGER CHECK (explained IN (0, 1));
