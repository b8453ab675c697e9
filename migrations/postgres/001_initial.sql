-- The audit log on PostgreSQL: the tables of migrations/001 to 008 as they stand after 008, in
-- PostgreSQL's types. Every column the hash chain seals (src/store/chain.ts) holds the same value
-- as in SQLite: times as Unix ms in BIGINT, flags as 0/1, the vectors as float64 LE in BYTEA,
-- tags and domain as the JSON text written (TEXT, not jsonb, which would reorder it).

CREATE TABLE models (
  sha256          TEXT PRIMARY KEY,
  name            TEXT NOT NULL,
  version         TEXT NOT NULL,
  features        TEXT NOT NULL,      -- JSON array of {name, unit}, in vector order
  classes         TEXT NOT NULL,      -- JSON array of class names, in probability order
  first_loaded_at BIGINT NOT NULL,
  last_loaded_at  BIGINT NOT NULL,
  bundle          TEXT
);

CREATE TABLE scored_requests (
  seq           BIGINT PRIMARY KEY,   -- place in the one hash chain of every replica, commit order
  request_id    TEXT NOT NULL UNIQUE,
  batch_id      TEXT,
  received_at   BIGINT NOT NULL,
  model_sha256  TEXT NOT NULL REFERENCES models (sha256),
  model_name    TEXT NOT NULL,
  model_version TEXT NOT NULL,
  features      BYTEA NOT NULL,
  tags          TEXT,
  label         TEXT NOT NULL,
  probabilities BYTEA NOT NULL,
  margin        DOUBLE PRECISION NOT NULL,
  in_domain     SMALLINT NOT NULL CHECK (in_domain IN (0, 1)),
  review        SMALLINT NOT NULL CHECK (review IN (0, 1)),
  domain        TEXT NOT NULL,
  latency_us    BIGINT NOT NULL,
  key_label     TEXT,
  explained     SMALLINT CHECK (explained IN (0, 1)),
  chain_hash    BYTEA NOT NULL
);

CREATE INDEX scored_requests_model_time ON scored_requests (model_name, received_at);
CREATE INDEX scored_requests_sha_time ON scored_requests (model_sha256, received_at, seq);
CREATE INDEX scored_requests_time ON scored_requests (received_at);

-- Where the next row joins the chain. Every commit of scored rows locks this one row (FOR UPDATE)
-- first, so that the commits of all replicas chain one after another in commit order.
CREATE TABLE chain_head (
  id   SMALLINT PRIMARY KEY CHECK (id = 1),
  seq  BIGINT NOT NULL,
  hash BYTEA NOT NULL
);
INSERT INTO chain_head (id, seq, hash) VALUES (1, 0, decode(repeat('00', 32), 'hex'));

CREATE TABLE chain_checkpoints (
  seq          BIGINT PRIMARY KEY,
  chain_hash   BYTEA NOT NULL,
  created_at   BIGINT NOT NULL,
  rows_removed BIGINT NOT NULL
);

CREATE TABLE rejected_requests (
  seq          BIGSERIAL PRIMARY KEY,
  request_id   TEXT NOT NULL,
  received_at  BIGINT NOT NULL,
  method       TEXT NOT NULL,
  route        TEXT NOT NULL,
  model_name   TEXT,
  status       INTEGER NOT NULL,
  problem_type TEXT NOT NULL,
  body_bytes   BIGINT
);

CREATE INDEX rejected_requests_time ON rejected_requests (received_at);
CREATE INDEX rejected_requests_model_time ON rejected_requests (model_name, received_at);

CREATE TABLE drift_reports (
  id            TEXT PRIMARY KEY,
  seq           BIGSERIAL UNIQUE,
  model_name    TEXT NOT NULL,
  model_sha256  TEXT NOT NULL,
  window_from   BIGINT NOT NULL,
  window_to     BIGINT NOT NULL,
  created_at    BIGINT NOT NULL,
  trigger       TEXT NOT NULL CHECK (trigger IN ('nightly', 'request', 'cli', 'demo')),
  report        TEXT NOT NULL
);

CREATE INDEX drift_reports_model_window ON drift_reports (model_name, window_from);
-- One nightly report per model and day, whatever the number of replicas.
CREATE UNIQUE INDEX drift_reports_one_nightly ON drift_reports (model_name, window_from, window_to) WHERE trigger = 'nightly';

CREATE TABLE alerts (
  id            TEXT PRIMARY KEY,
  seq           BIGSERIAL UNIQUE,
  rule          TEXT NOT NULL,
  model_name    TEXT NOT NULL,
  signal        TEXT NOT NULL,
  direction     TEXT NOT NULL CHECK (direction IN ('above', 'below')),
  threshold     DOUBLE PRECISION NOT NULL,
  window_ms     BIGINT NOT NULL,
  raised_value  DOUBLE PRECISION NOT NULL,
  raised_at     BIGINT NOT NULL,
  cleared_value DOUBLE PRECISION,
  cleared_at    BIGINT
);

CREATE INDEX alerts_open ON alerts (rule, model_name) WHERE cleared_at IS NULL;
CREATE INDEX alerts_time ON alerts (raised_at);

CREATE TABLE outbox (
  seq             BIGSERIAL PRIMARY KEY,
  event_id        TEXT NOT NULL,
  webhook         TEXT NOT NULL,
  ordering_key    TEXT NOT NULL,
  body            TEXT NOT NULL,
  status          TEXT NOT NULL CHECK (status IN ('pending', 'delivered', 'failed')),
  attempts        INTEGER NOT NULL DEFAULT 0,
  created_at      BIGINT NOT NULL,
  next_attempt_at BIGINT NOT NULL,
  delivered_at    BIGINT,
  last_error      TEXT,
  -- A replica delivering this row holds it until then (Unix ms, wall clock); another may take it after.
  lease_until     BIGINT,
  UNIQUE (event_id, webhook)
);

CREATE INDEX outbox_pending ON outbox (status, next_attempt_at);

CREATE TABLE api_keys (
  id           TEXT PRIMARY KEY,
  prefix       TEXT NOT NULL,
  hash         TEXT NOT NULL UNIQUE,
  role         TEXT NOT NULL CHECK (role IN ('scorer', 'reader', 'admin')),
  label        TEXT NOT NULL,
  created_at   BIGINT NOT NULL,
  last_used_at BIGINT,
  revoked_at   BIGINT
);

CREATE INDEX api_keys_prefix ON api_keys (prefix);

CREATE TABLE write_probe (
  id INTEGER PRIMARY KEY CHECK (id = 1),
  at BIGINT NOT NULL
);
