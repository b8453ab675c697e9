import type { Awaitable, Sync } from './awaitable.js';
import type { Database } from 'better-sqlite3';

export type Role = 'scorer' | 'reader' | 'admin';

export interface KeyRecord {
  id: string;
  prefix: string;
  role: Role;
  label: string;
  created_at: number;
  last_used_at: number | null;
  revoked_at: number | null;
}

export interface KeysStore {
  create(k: { id: string; prefix: string; hash: string; role: Role; label: string; createdAt: number }): Awaitable<void>;
  list(): Awaitable<KeyRecord[]>;
  /** Revokes a key; false when no key has that id (or it was revoked already). */
  revoke(id: string, at: number): Awaitable<boolean>;
  /** Live keys whose public prefix is this (at most a few); the caller compares hashes. */
  findByPrefix(prefix: string): Awaitable<Array<KeyRecord & { hash: string }>>;
  /**
   * Whether any key was ever made, revoked or not: from then on every /v1 route needs one.
   * Revoking the last key locks the service rather than opening it.
   */
  anyKey(): Awaitable<boolean>;
  touch(id: string, at: number): Awaitable<void>;
}

export function createKeysStore(db: Database): Sync<KeysStore> {
  const insert = db.prepare('INSERT INTO api_keys (id, prefix, hash, role, label, created_at) VALUES (?, ?, ?, ?, ?, ?)');
  const all = db.prepare('SELECT id, prefix, role, label, created_at, last_used_at, revoked_at FROM api_keys ORDER BY created_at, id');
  const revoke = db.prepare('UPDATE api_keys SET revoked_at = ? WHERE id = ? AND revoked_at IS NULL');
  const byPrefix = db.prepare('SELECT id, prefix, hash, role, label, created_at, last_used_at, revoked_at FROM api_keys WHERE prefix = ? AND revoked_at IS NULL');
  const any = db.prepare('SELECT 1 FROM api_keys LIMIT 1');
  const touch = db.prepare('UPDATE api_keys SET last_used_at = ? WHERE id = ?');
  return {
    create: (k) => void insert.run(k.id, k.prefix, k.hash, k.role, k.label, k.createdAt),
    list: () => all.all() as KeyRecord[],
    revoke: (id, at) => revoke.run(at, id).changes === 1,
    findByPrefix: (prefix) => byPrefix.all(prefix) as Array<KeyRecord & { hash: string }>,
    anyKey: () => any.get() !== undefined,
    touch: (id, at) => void touch.run(at, id),
  };
}
