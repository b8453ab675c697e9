import type { KeyRecord, KeysStore } from '../keys-store.js';
import type { Pool } from './pool.js';

const COLUMNS = 'id, prefix, role, label, created_at, last_used_at, revoked_at';

/** API keys on the server: a key made or revoked on one replica holds on all of them at once. */
export function createServerKeysStore(pool: Pool): KeysStore {
  return {
    create: async (k) => void (await pool.query('INSERT INTO api_keys (id, prefix, hash, role, label, created_at) VALUES ($1, $2, $3, $4, $5, $6)', [k.id, k.prefix, k.hash, k.role, k.label, k.createdAt])),
    list: async () => (await pool.query(`SELECT ${COLUMNS} FROM api_keys ORDER BY created_at, id`)).rows as KeyRecord[],
    revoke: async (id, at) => (await pool.query('UPDATE api_keys SET revoked_at = $1 WHERE id = $2 AND revoked_at IS NULL', [at, id])).rowCount === 1,
    findByPrefix: async (prefix) => (await pool.query(`SELECT ${COLUMNS}, hash FROM api_keys WHERE prefix = $1 AND revoked_at IS NULL`, [prefix])).rows as Array<KeyRecord & { hash: string }>,
    anyKey: async () => (await pool.query('SELECT 1 FROM api_keys LIMIT 1')).rows.length > 0,
    touch: async (id, at) => void (await pool.query('UPDATE api_keys SET last_used_at = $1 WHERE id = $2', [at, id])),
  };
}
