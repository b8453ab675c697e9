-- What each part turned out to be (issue 17): one row per outcome recorded, never updated. A
-- different label for the same request is a new row that names the one it replaces; the
-- request's outcome is its newest row. The rows are sealed into a hash chain of their own
-- (src/store/outcome-chain.ts), which `plumbline audit verify` recomputes beside the scored rows'.

CREATE TABLE outcomes (
  seq         INTEGER PRIMARY KEY,    -- commit order, 1, 2, ... without gaps
  request_id  TEXT NOT NULL,          -- scored_requests.request_id of the answer it judges
  label       TEXT NOT NULL,          -- what the part was: a class of that answer's bundle
  observed_at INTEGER,                -- Unix ms, when the line said when it was found; NULL when not
  source      TEXT,                   -- free text: the station, the gauge, a customer return
  recorded_at INTEGER NOT NULL,       -- Unix ms, when plumbline received it
  key_label   TEXT,                   -- label of the API key it came with; NULL without keys
  replaces    INTEGER,                -- seq of the outcome it replaces ("replace": true); NULL when the first
  chain_hash  BLOB NOT NULL
) STRICT;

CREATE INDEX outcomes_request ON outcomes (request_id, seq);
