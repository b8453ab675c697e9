-- Alerts raised and cleared by the rules of the configuration, and the webhook deliveries that
-- announce them. The outbox is durable: a delivery survives a restart and is retried until it
-- succeeds or its time runs out.

CREATE TABLE alerts (
  id            TEXT PRIMARY KEY,      -- UUID v7
  seq           INTEGER NOT NULL UNIQUE,
  rule          TEXT NOT NULL,
  model_name    TEXT NOT NULL,
  signal        TEXT NOT NULL,
  direction     TEXT NOT NULL CHECK (direction IN ('above', 'below')),
  threshold     REAL NOT NULL,
  window_ms     INTEGER NOT NULL,
  raised_value  REAL NOT NULL,
  raised_at     INTEGER NOT NULL,      -- Unix ms
  cleared_value REAL,
  cleared_at    INTEGER                -- NULL while raised
) STRICT;

CREATE INDEX alerts_open ON alerts (rule, model_name) WHERE cleared_at IS NULL;
CREATE INDEX alerts_time ON alerts (raised_at);

CREATE TABLE outbox (
  seq             INTEGER PRIMARY KEY, -- delivery order
  event_id        TEXT NOT NULL,       -- CloudEvents id, also the webhook-id of every attempt
  webhook         TEXT NOT NULL,       -- name of the webhook in the configuration
  ordering_key    TEXT NOT NULL,       -- rule and model: deliveries with one key go in order
  body            TEXT NOT NULL,       -- the event, exactly as signed and sent
  status          TEXT NOT NULL CHECK (status IN ('pending', 'delivered', 'failed')),
  attempts        INTEGER NOT NULL DEFAULT 0,
  created_at      INTEGER NOT NULL,
  next_attempt_at INTEGER NOT NULL,
  delivered_at    INTEGER,
  last_error      TEXT,
  UNIQUE (event_id, webhook)
) STRICT;

CREATE INDEX outbox_pending ON outbox (status, next_attempt_at);
