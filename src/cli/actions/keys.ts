import { existsSync } from 'node:fs';
import { generateKey } from '../../auth/keys.js';
import { uuidv7 } from '../../ids.js';
import { openDatabase } from '../../store/database.js';
import { isServerUrl, maskUrl } from '../../store/location.js';
import { withServerKeys } from '../../store/postgres/open.js';
import { type KeyRecord, type KeysStore, type Role, createKeysStore } from '../../store/keys-store.js';
import { type CliIo, UsageError } from '../io.js';

/**
 * The keys table alone, not the audit log: keys can be made and revoked whatever state the log
 * is in (a key must be revocable even when the chain is broken), and nothing else is touched.
 */
async function withKeys<T>(db: string, create: boolean, fn: (keys: KeysStore) => Promise<T>): Promise<T> {
  if (isServerUrl(db)) return withServerKeys(db, fn);
  if (!create && !existsSync(db)) throw new UsageError(`--db ${db}: no such file`);
  const handle = openDatabase(db, { sync: 'full' });
  try {
    return await fn(createKeysStore(handle));
  } finally {
    handle.close();
  }
}

/**
 * `plumbline keys create`: makes a key and prints it once, as the last line of stdout. Only its
 * SHA-256 is stored. The database is created when missing, so that a key can exist before the
 * service first starts.
 */
export async function createKeyAction(ctx: { db: string; role: Role; label: string; now?: number }, io: CliIo): Promise<{ id: string; key: string }> {
  const label = ctx.label.trim();
  if (label === '' || label.length > 128 || /\p{Cc}/u.test(label)) throw new UsageError('--label must be 1 to 128 characters without control characters');
  const { key, hash, prefix } = generateKey();
  const id = uuidv7();
  await withKeys(ctx.db, true, async (keys) => keys.create({ id, prefix, hash, role: ctx.role, label, createdAt: ctx.now ?? Date.now() }));
  io.stderr.write(`created ${ctx.role} key ${id} (${JSON.stringify(label)}) in ${maskUrl(ctx.db)}\nthe key is printed once, below; store it now, it cannot be shown again\n`);
  io.stdout.write(`${key}\n`);
  return { id, key };
}

const time = (ms: number | null): string => (ms === null ? '-' : new Date(ms).toISOString().slice(0, 19).concat('Z'));

/** `plumbline keys list`: every key with its role and label, when made and last used; never the key. */
export async function listKeysAction(ctx: { db: string; json: boolean }, io: CliIo): Promise<KeyRecord[]> {
  const keys = await withKeys(ctx.db, false, async (k) => k.list());
  if (ctx.json) {
    io.stdout.write(`${JSON.stringify(keys.map((k) => ({ ...k, created_at: time(k.created_at), last_used_at: k.last_used_at === null ? null : time(k.last_used_at), revoked_at: k.revoked_at === null ? null : time(k.revoked_at) })), null, 2)}\n`);
    return keys;
  }
  const rows = [['id', 'prefix', 'role', 'label', 'created', 'last used', 'revoked'], ...keys.map((k) => [k.id, `${k.prefix}…`, k.role, k.label, time(k.created_at), time(k.last_used_at), time(k.revoked_at)])];
  const widths = rows[0]!.map((_, c) => Math.max(...rows.map((r) => (r[c] as string).length)));
  for (const r of rows) io.stdout.write(`${r.map((v, c) => v.padEnd(widths[c] as number)).join('  ').trimEnd()}\n`);
  if (keys.length === 0) io.stderr.write('no keys: the service asks for none, and serves on loopback addresses only\n');
  return keys;
}

/** `plumbline keys revoke ID`: the key stops working at once (within the service's next request). */
export async function revokeKeyAction(ctx: { db: string; id: string; now?: number }, io: CliIo): Promise<void> {
  const done = await withKeys(ctx.db, false, async (keys) => {
    const k = (await keys.list()).find((x) => x.id === ctx.id);
    if (!k) throw new UsageError(`no key has the id ${ctx.id} (plumbline keys list shows them)`);
    if (k.revoked_at !== null) throw new UsageError(`key ${ctx.id} was revoked already, at ${time(k.revoked_at)}`);
    await keys.revoke(ctx.id, ctx.now ?? Date.now());
    return k;
  });
  io.stdout.write(`revoked ${done.role} key ${done.id} (${JSON.stringify(done.label)})\n`);
}
