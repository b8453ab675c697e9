import { createHash } from 'node:crypto';
import BetterSqlite3 from 'better-sqlite3';
import { afterAll, describe, expect, it } from 'vitest';
import { migrate, readMigrations } from '../../src/store/migrate.js';
import type { ScoredRow } from '../../src/store/request-log.js';
import { openStore } from '../../src/store/store.js';
import { tempDir } from '../helpers/datasets.js';

const tmp = tempDir();
afterAll(() => tmp.remove());
const MODEL = { sha256: 'e'.repeat(64), name: 'press-7', version: '2' };
const OPTIONS = { sync: 'normal' as const, flushMs: 0, flushRows: 512, queueRows: 10_000, rejectedRows: 100 };
const T0 = Date.parse('2026-10-01T00:00:00Z');

/**
 * The bytes a row was sealed with before migration 006, written out here from the layout in
 * docs/security.md, apart from the code under test: every column in order, numbers as float64
 * LE, text and blobs after an int32 LE length (-1 for null).
 */
function bytesBefore006(r: Record<string, unknown>): Buffer {
  const parts: Buffer[] = [];
  const num = (v: number): void => {
    const b = Buffer.alloc(8);
    b.writeDoubleLE(v);
    parts.push(b);
  };
  const lenPrefixed = (v: Buffer | null): void => {
    const b = Buffer.alloc(4);
    b.writeInt32LE(v === null ? -1 : v.length);
    parts.push(b);
    if (v !== null) parts.push(v);
  };
  const text = (v: unknown): void => lenPrefixed(v === null ? null : Buffer.from(v as string, 'utf8'));
  num(r.seq as number);
  text(r.request_id);
  text(r.batch_id);
  num(r.received_at as number);
  text(r.model_sha256);
  text(r.model_name);
  text(r.model_version);
  lenPrefixed(r.features as Buffer);
  text(r.tags);
  text(r.label);
  lenPrefixed(r.probabilities as Buffer);
  num(r.margin as number);
  num(r.in_domain as number);
  num(r.review as number);
  text(r.domain);
  num(r.latency_us as number);
  text(r.key_label);
  return Buffer.concat(parts);
}

const sha = (prev: Buffer, bytes: Buffer): Buffer => createHash('sha256').update(Buffer.concat([prev, bytes])).digest();

let n = 0;
const scored = (explained: boolean): ScoredRow => ({
  requestId: `x-${++n}`,
  batchId: null,
  receivedAt: T0 + n * 1000,
  model: MODEL,
  features: [n, 2 * n],
  tags: null,
  label: 'ok',
  probabilities: [0.7, 0.3],
  margin: 0.4,
  inDomain: true,
  review: false,
  domain: { checks: [], outside: [] },
  latencyUs: 80,
  keyLabel: null,
  explained,
});

describe('the explained flag in the hash chain (migration 006)', () => {
  it('keeps rows sealed before it verifiable, seals it in rows written after, and names a row where it was changed', async () => {
    const file = tmp.file('explained.db');
    // A log as the version before 006 left it: migrations 001-005, rows sealed with the old bytes.
    const old = new BetterSqlite3(file);
    migrate(old, readMigrations().filter((m) => m.version <= 5), file);
    old.prepare('DELETE FROM chain_seal_pending').run();
    old.prepare("INSERT INTO models (sha256, name, version, features, classes, first_loaded_at) VALUES (?, ?, ?, '[{\"name\":\"a\",\"unit\":\"mm\"},{\"name\":\"b\",\"unit\":\"mm\"}]', '[\"ok\",\"bad\"]', 0)").run(MODEL.sha256, MODEL.name, MODEL.version);
    const insert = old.prepare(`INSERT INTO scored_requests (seq, request_id, batch_id, received_at, model_sha256, model_name, model_version, features, tags, label, probabilities, margin, in_domain, review, domain, latency_us, key_label, chain_hash)
      VALUES (@seq, @request_id, @batch_id, @received_at, @model_sha256, @model_name, @model_version, @features, @tags, @label, @probabilities, @margin, @in_domain, @review, @domain, @latency_us, @key_label, @chain_hash)`);
    let prev: Buffer = Buffer.alloc(32);
    for (let seq = 1; seq <= 3; seq++) {
      const row = {
        seq,
        request_id: `old-${seq}`,
        batch_id: null,
        received_at: T0 - seq,
        model_sha256: MODEL.sha256,
        model_name: MODEL.name,
        model_version: MODEL.version,
        features: Buffer.from(Float64Array.of(seq, -seq).buffer),
        tags: null,
        label: 'ok',
        probabilities: Buffer.from(Float64Array.of(0.6, 0.4).buffer),
        margin: 0.2,
        in_domain: 1,
        review: 0,
        domain: '{"checks":[],"outside":[]}',
        latency_us: 90,
        key_label: seq === 2 ? 'line-7' : null,
      };
      prev = sha(prev, bytesBefore006(row));
      insert.run({ ...row, chain_hash: prev });
    }
    old.close();

    // This version opens it: 006 runs, the old rows verify as they were sealed.
    const store = openStore(file, OPTIONS);
    expect(store.verifyChain()).toMatchObject({ intact: true, rows: 3 });
    await store.log.append([scored(true)]);
    await store.log.append([scored(false), scored(true)]);
    const v = store.verifyChain();
    expect(v).toMatchObject({ intact: true, rows: 6 });
    store.close();

    const db = new BetterSqlite3(file);
    const rows = db.prepare('SELECT * FROM scored_requests ORDER BY seq').all() as Array<Record<string, unknown>>;
    expect(rows.map((r) => r.explained)).toEqual([null, null, null, 1, 0, 1]);
    // A new row's bytes are the old layout followed by the flag as a float64.
    const four = rows[3] as Record<string, unknown>;
    const flag = Buffer.alloc(8);
    flag.writeDoubleLE(1);
    expect(sha(rows[2]?.chain_hash as Buffer, Buffer.concat([bytesBefore006(four), flag])).equals(four.chain_hash as Buffer)).toBe(true);

    const verdict = (): ReturnType<typeof store.verifyChain> => {
      const s = openStore(file, OPTIONS);
      try {
        return s.verifyChain();
      } finally {
        s.close();
      }
    };
    // Flipping the flag of a new row, clearing it, or giving an old row one: each is named.
    for (const [sql, seq] of [
      ['UPDATE scored_requests SET explained = 0 WHERE seq = 4', 4],
      ['UPDATE scored_requests SET explained = NULL WHERE seq = 5', 5],
      ['UPDATE scored_requests SET explained = 1 WHERE seq = 2', 2],
    ] as const) {
      const before = db.prepare(`SELECT explained FROM scored_requests WHERE seq = ${seq}`).get() as { explained: number | null };
      db.prepare(sql).run();
      expect(verdict().problem).toMatchObject({ kind: 'changed', seq });
      db.prepare(`UPDATE scored_requests SET explained = ? WHERE seq = ${seq}`).run(before.explained);
      expect(verdict().intact).toBe(true);
    }
    db.close();
  });
});
