-- What each part turned out to be (issue 17), on the server: the table of the SQLite store's
-- migration 009 in PostgreSQL's types. One row per outcome recorded, never updated; a different
-- label for the same request is a new row naming the one it replaces. The rows are sealed into a
-- hash chain of their own (src/store/outcome-chain.ts), the same bytes as on SQLite.

CREATE TABLE outcomes (
  seq         BIGINT PRIMARY KEY,     -- place in the one outcome chain of every replica, commit order
  request_id  TEXT NOT NULL,          -- scored_requests.request_id of the answer it judges
  label       TEXT NOT NULL,          -- what the part was: a class of that answer's bundle
  observed_at BIGINT,                 -- Unix ms, when the line said when it was found; NULL when not
  source      TEXT,                   -- free text: the station, the gauge, a customer return
  recorded_at BIGINT NOT NULL,        -- Unix ms, when plumbline received it
  key_label   TEXT,                   -- label of the API key it came with; NULL without keys
  replaces    BIGINT,                 -- seq of the outcome it replaces ("replace": true); NULL when the first
  chain_hash  BYTEA NOT NULL
);

CREATE INDEX outcomes_request ON outcomes (request_id, seq);

-- Where the next outcome joins its chain. Every batch of outcomes locks this one row (FOR UPDATE)
-- first, so that the batches of all replicas chain one after another in commit order, as the
-- scored rows do on chain_head.
CREATE TABLE outcome_chain_head (
  id   SMALLINT PRIMARY KEY CHECK (id = 1),
  seq  BIGINT NOT NULL,
  hash BYTEA NOT NULL
);
INSERT INTO outcome_chain_head (id, seq, hash) VALUES (1, 0, decode(repeat('00', 32), 'hex'));
