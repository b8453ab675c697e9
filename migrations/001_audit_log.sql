-- The audit log: the models that answered, one row per scored vector, and the requests refused.
-- Times are Unix milliseconds (UTC). Vectors are little-endian float64 so values round-trip exactly.

CREATE TABLE models (
  sha256          TEXT PRIMARY KEY,   -- the bundle's sealed hash
  name            TEXT NOT NULL,
  version         TEXT NOT NULL,
  features        TEXT NOT NULL,      -- JSON array of {name, unit}, in vector order
  classes         TEXT NOT NULL,      -- JSON array of class names, in probability order
  first_loaded_at INTEGER NOT NULL
) STRICT;

CREATE TABLE scored_requests (
  seq           INTEGER PRIMARY KEY,  -- commit order
  request_id    TEXT NOT NULL UNIQUE, -- UUID v7 given in the answer
  batch_id      TEXT,                 -- id of the score-batch call that carried it; NULL for single scoring
  received_at   INTEGER NOT NULL,
  model_sha256  TEXT NOT NULL REFERENCES models (sha256),
  model_name    TEXT NOT NULL,
  model_version TEXT NOT NULL,
  features      BLOB NOT NULL,        -- float64 LE, in models.features order
  tags          TEXT,                 -- JSON object of strings, NULL when none were sent
  label         TEXT NOT NULL,        -- predicted class
  probabilities BLOB NOT NULL,        -- float64 LE, in models.classes order
  margin        REAL NOT NULL,
  in_domain     INTEGER NOT NULL CHECK (in_domain IN (0, 1)),
  review        INTEGER NOT NULL CHECK (review IN (0, 1)),
  domain        TEXT NOT NULL,        -- JSON {checks, outside} as in the answer
  latency_us    INTEGER NOT NULL      -- from receipt to the answer being ready, before the commit
) STRICT;

CREATE INDEX scored_requests_model_time ON scored_requests (model_name, received_at);
CREATE INDEX scored_requests_time ON scored_requests (received_at);

CREATE TABLE rejected_requests (
  seq          INTEGER PRIMARY KEY,
  request_id   TEXT NOT NULL,         -- id of the refused HTTP request (as in the service log)
  received_at  INTEGER NOT NULL,
  method       TEXT NOT NULL,
  route        TEXT NOT NULL,         -- the URL path, without the query string
  model_name   TEXT,                  -- when the path names one
  status       INTEGER NOT NULL,
  problem_type TEXT NOT NULL,         -- the problem+json type sent back
  body_bytes   INTEGER                -- Content-Length as sent, when given
) STRICT;

CREATE INDEX rejected_requests_time ON rejected_requests (received_at);
