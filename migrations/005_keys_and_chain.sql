-- API keys, who sent each scored request, and the hash chain that makes changes to the audit log
-- evident. Rows logged before this migration are sealed into the chain once, the next time the
-- store opens (src/store/seal.ts); after that a row without a chain hash is a finding.

CREATE TABLE api_keys (
  id           TEXT PRIMARY KEY,       -- UUID v7; shown by `keys list`, used by `keys revoke`
  prefix       TEXT NOT NULL,          -- the first characters of the key, to recognise it
  hash         TEXT NOT NULL UNIQUE,   -- hex SHA-256 of the whole key; the key itself is never stored
  role         TEXT NOT NULL CHECK (role IN ('scorer', 'reader', 'admin')),
  label        TEXT NOT NULL,
  created_at   INTEGER NOT NULL,
  last_used_at INTEGER,
  revoked_at   INTEGER
) STRICT;

ALTER TABLE scored_requests ADD COLUMN key_label TEXT;
-- SHA-256 over the previous row's chain_hash and this row's canonical bytes (src/store/chain.ts).
ALTER TABLE scored_requests ADD COLUMN chain_hash BLOB;

-- Written before retention deletes rows: the chain hash of the last row removed, so that the rows
-- kept can still be verified from there.
CREATE TABLE chain_checkpoints (
  seq          INTEGER PRIMARY KEY,    -- the last seq removed
  chain_hash   BLOB NOT NULL,
  created_at   INTEGER NOT NULL,
  rows_removed INTEGER NOT NULL
) STRICT;

CREATE INDEX api_keys_prefix ON api_keys (prefix);

-- Present until the rows logged before this migration have been sealed, once.
CREATE TABLE chain_seal_pending (
  one INTEGER PRIMARY KEY CHECK (one = 1)
) STRICT;
INSERT INTO chain_seal_pending (one) VALUES (1);
