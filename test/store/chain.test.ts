import { createHash } from 'node:crypto';
import BetterSqlite3 from 'better-sqlite3';
import { afterAll, afterEach, beforeEach, describe, expect, it } from 'vitest';
import { pruneBefore } from '../../src/jobs/retention.js';
import { GENESIS, rowBytes } from '../../src/store/chain.js';
import type { ScoredRow } from '../../src/store/request-log.js';
import { type SqliteStore as Store, openStore } from '../../src/store/store.js';
import { tempDir } from '../helpers/datasets.js';
import chainReference from '../fixtures/chain-reference.json' with { type: 'json' };

const tmp = tempDir();
afterAll(() => tmp.remove());
const MODEL = { sha256: 'c'.repeat(64), name: 'press-4', version: '1' };
const T0 = Date.parse('2026-09-01T00:00:00Z');
const DAY = 86_400_000;
const OPTIONS = { sync: 'normal' as const, flushMs: 0, flushRows: 512, queueRows: 10_000, rejectedRows: 100 };

let file = '';
let store: Store;
let n = 0;
const row = (receivedAt: number, label = 'ok'): ScoredRow => ({
  requestId: `r-${++n}`,
  batchId: null,
  receivedAt,
  model: MODEL,
  features: [n, -n / 3],
  tags: { line: '4' },
  label,
  probabilities: [0.9, 0.1],
  margin: 0.8,
  inDomain: true,
  review: false,
  domain: { checks: [], outside: [] },
  latencyUs: 50,
  keyLabel: 'line-4 app',
});

/** A second connection, as someone with write access to the file would have. */
function tamper(sql: (db: BetterSqlite3.Database) => void): void {
  const db = new BetterSqlite3(file);
  sql(db);
  db.close();
}

beforeEach(async () => {
  file = tmp.file(`chain-${Math.random().toString(36).slice(2)}.db`);
  store = openStore(file, OPTIONS);
  store.recordModel({ ...MODEL, features: [{ name: 'a', unit: 'mm' }, { name: 'b', unit: 'bar' }], classes: ['ok', 'bad'] });
  // 20 rows a day apart, in three commits of different sizes
  for (const group of [[0, 1, 2], [3, 4, 5, 6, 7, 8, 9, 10], [11, 12, 13, 14, 15, 16, 17, 18, 19]]) {
    await store.log.append(group.map((d) => row(T0 + d * DAY)));
  }
});
afterEach(() => store.close());

describe('hash chain of the audit log', () => {
  it('has the byte layout docs/security.md documents: rows written through the log get the hashes Python computes from that layout (test/fixtures/make-chain-fixture.py, struct and hashlib)', async () => {
    const fresh = openStore(tmp.file('chain-reference.db'), OPTIONS);
    const first = chainReference.rows[0]!.row;
    fresh.recordModel({ sha256: first.model_sha256, name: first.model_name, version: first.model_version, features: first.features.map((_, j) => ({ name: `f${j}`, unit: '' })), classes: first.probabilities.map((_, k) => `c${k}`) });
    try {
      for (const { row: r } of chainReference.rows) {
        await fresh.log.append([
          {
            requestId: r.request_id,
            batchId: r.batch_id,
            receivedAt: r.received_at,
            model: { sha256: r.model_sha256, name: r.model_name, version: r.model_version },
            features: r.features,
            tags: r.tags === null ? null : (JSON.parse(r.tags) as Record<string, string>),
            label: r.label,
            probabilities: r.probabilities,
            margin: r.margin,
            inDomain: r.in_domain === 1,
            review: r.review === 1,
            domain: JSON.parse(r.domain) as ScoredRow['domain'],
            latencyUs: r.latency_us,
            keyLabel: r.key_label,
            explained: r.explained === 1,
          },
        ]);
      }
      const stored = new BetterSqlite3(fresh.file, { readonly: true }).prepare('SELECT * FROM scored_requests ORDER BY seq').all() as Array<Parameters<typeof rowBytes>[0] & { chain_hash: Buffer }>;
      expect(stored).toHaveLength(chainReference.rows.length);
      stored.forEach((r, i) => {
        const want = chainReference.rows[i]!;
        expect(rowBytes(r).toString('hex')).toBe(want.bytes);
        expect(r.chain_hash.toString('hex')).toBe(want.chain_hash);
      });
    } finally {
      fresh.close();
    }
  });

  it('chains every row: hash_i = SHA-256(hash_{i-1} || bytes_i), from 32 zero bytes', () => {
    const rows = new BetterSqlite3(file, { readonly: true }).prepare('SELECT * FROM scored_requests ORDER BY seq').all() as Array<Parameters<typeof rowBytes>[0] & { chain_hash: Buffer }>;
    expect(rows.map((r) => r.seq)).toEqual(Array.from({ length: 20 }, (_, i) => i + 1));
    let prev: Buffer = GENESIS;
    for (const r of rows) {
      // recomputed with node:crypto directly, apart from the code under test's chainHash
      const expected = createHash('sha256').update(Buffer.concat([prev, rowBytes(r)])).digest();
      expect(r.chain_hash.equals(expected)).toBe(true);
      prev = r.chain_hash;
    }
    expect(rows[0]!.key_label).toBe('line-4 app');
    const v = store.verifyChain();
    expect(v).toMatchObject({ intact: true, rows: 20, from: { seq: 0, cut: false }, problem: null });
    expect(v.head).toEqual({ seq: 20, hash: prev.toString('hex') });
  });

  it('names a row that was changed', () => {
    tamper((db) => db.prepare("UPDATE scored_requests SET label = 'bad' WHERE seq = 7").run());
    expect(store.verifyChain()).toMatchObject({ intact: false, rows: 6, problem: { kind: 'changed', seq: 7, request_id: expect.stringMatching(/^r-/) } });
  });

  it('names a changed feature value even when one bit differs', () => {
    tamper((db) => {
      const r = db.prepare('SELECT features FROM scored_requests WHERE seq = 12').get() as { features: Buffer };
      r.features[0] = (r.features[0] as number) ^ 1;
      db.prepare('UPDATE scored_requests SET features = ? WHERE seq = 12').run(r.features);
    });
    expect(store.verifyChain().problem).toMatchObject({ kind: 'changed', seq: 12 });
  });

  it('names the first row of a gap where rows were removed', () => {
    tamper((db) => db.prepare('DELETE FROM scored_requests WHERE seq IN (9, 10)').run());
    expect(store.verifyChain().problem).toMatchObject({ kind: 'removed', seq: 9, detail: 'rows 9 to 10 are missing: the chain goes from 8 to 11' });
  });

  it('names a single removed row as such', () => {
    tamper((db) => db.prepare('DELETE FROM scored_requests WHERE seq = 14').run());
    expect(store.verifyChain().problem).toMatchObject({ kind: 'removed', seq: 14, detail: 'row 14 is missing: the chain goes from 13 to 15' });
  });

  it('names a row that was put in, the rows after it renumbered to make room', () => {
    tamper((db) => {
      db.prepare('UPDATE scored_requests SET seq = -seq WHERE seq >= 5').run();
      db.prepare('UPDATE scored_requests SET seq = 1 - seq WHERE seq < 0').run();
      db.prepare("INSERT INTO scored_requests SELECT 5, 'forged', batch_id, received_at, model_sha256, model_name, model_version, features, tags, 'bad', probabilities, margin, in_domain, review, domain, latency_us, key_label, chain_hash, explained FROM scored_requests WHERE seq = 4").run();
    });
    expect(store.verifyChain().problem).toMatchObject({ kind: 'inserted', seq: 5, request_id: 'forged' });
  });

  it('finds rows cut from the end, or a chain rewritten whole, only against a head recorded before', async () => {
    const recorded = store.verifyChain().head;
    tamper((db) => db.prepare('DELETE FROM scored_requests WHERE seq > 17').run());
    // on its own the shorter log is a valid chain ...
    expect(store.verifyChain()).toMatchObject({ intact: true, head: { seq: 17 } });
    // ... but not against the head recorded earlier
    expect(store.verifyChain(recorded).problem).toMatchObject({ kind: 'removed', seq: 18 });
    expect(store.verifyChain({ seq: 10, hash: 'ab'.repeat(32) }).problem).toMatchObject({ kind: 'anchor', seq: 10 });
  });

  it('seals the rows logged before the chain existed, once, when the store opens after the upgrade', () => {
    store.close();
    // as migration 005 finds an older log: rows without chain hashes, and its marker
    tamper((db) => {
      db.prepare('UPDATE scored_requests SET chain_hash = NULL').run();
      db.prepare('INSERT INTO chain_seal_pending (one) VALUES (1)').run();
    });
    store = openStore(file, OPTIONS);
    expect(store.verifyChain()).toMatchObject({ intact: true, rows: 20 });
    const db = new BetterSqlite3(file, { readonly: true });
    expect(db.prepare('SELECT COUNT(*) AS n FROM chain_seal_pending').get()).toEqual({ n: 0 });
    db.close();
  });

  it('never seals a row whose chain hash was removed later, and will not log after one', () => {
    tamper((db) => db.prepare("UPDATE scored_requests SET chain_hash = NULL, label = 'bad' WHERE seq = 8").run());
    expect(store.verifyChain().problem).toMatchObject({ kind: 'unsealed', seq: 8 });
    store.close();
    store = openStore(file, OPTIONS);
    expect(store.verifyChain().problem).toMatchObject({ kind: 'unsealed', seq: 8 });
    store.close();
    tamper((db) => db.prepare('UPDATE scored_requests SET chain_hash = NULL WHERE seq = 20').run());
    expect(() => openStore(file, OPTIONS)).toThrow(/row 20, the newest of the audit log, has no chain hash.*audit verify/);
    store = openStore(tmp.file('spare.db'), OPTIONS);
  });

  it('keeps chaining across a restart', async () => {
    const before = store.verifyChain().head;
    store.close();
    store = openStore(file, OPTIONS);
    await store.log.append([row(T0 + 30 * DAY)]);
    const v = store.verifyChain(before);
    expect(v).toMatchObject({ intact: true, rows: 21, head: { seq: 21 } });
  });
});

describe('retention', () => {
  it('prunes the oldest rows in small transactions behind a checkpoint, and the rest still verify', async () => {
    const anchor = store.verifyChain().head;
    // keep the rows received on or after day 12; chunks of 5 rows take three steps for the 12 old rows
    const pruned = await pruneBefore(store.retention, T0 + 12 * DAY, 5);
    expect(pruned).toMatchObject({ scored: 12, steps: 3 });
    const db = new BetterSqlite3(file, { readonly: true });
    expect(db.prepare('SELECT MIN(seq) AS first, COUNT(*) AS n FROM scored_requests').get()).toEqual({ first: 13, n: 8 });
    expect(db.prepare('SELECT seq, rows_removed FROM retention_cuts ORDER BY seq').all()).toEqual([
      { seq: 5, rows_removed: 5 },
      { seq: 10, rows_removed: 5 },
      { seq: 12, rows_removed: 2 },
    ]);
    db.close();
    expect(store.verifyChain(anchor)).toMatchObject({ intact: true, rows: 8, from: { seq: 12, cut: true }, head: anchor, anchor: 'checked' });
    // a head recorded at a row retention has removed cannot be checked, and the verdict says so
    expect(store.verifyChain({ seq: 3, hash: 'ab'.repeat(32) })).toMatchObject({ intact: true, anchor: 'pruned' });
    expect(store.verifyChain({ seq: 12, hash: 'ab'.repeat(32) }).problem).toMatchObject({ kind: 'anchor', seq: 12 });
    // new rows chain on from the newest row as before
    await store.log.append([row(T0 + 40 * DAY)]);
    expect(store.verifyChain()).toMatchObject({ intact: true, rows: 9 });
  });

  it('keeps a newer row and everything after it, so that the kept rows are one unbroken chain', async () => {
    // a row replayed with an old time, logged after newer ones, is kept with them
    await store.log.append([row(T0 - 100 * DAY)]);
    await pruneBefore(store.retention, T0 + 15 * DAY);
    expect(store.verifyChain()).toMatchObject({ intact: true, rows: 6, from: { seq: 15 }, head: { seq: 21 } });
  });

  it('chains the next row after the checkpoint when every row was pruned', async () => {
    await pruneBefore(store.retention, T0 + 50 * DAY);
    expect(store.verifyChain()).toMatchObject({ intact: true, rows: 0, head: { seq: 20 } });
    await store.log.append([row(T0 + 60 * DAY)]);
    expect(store.verifyChain()).toMatchObject({ intact: true, rows: 1, head: { seq: 21 } });
  });

  it('refuses to verify a row put back before the checkpoint', async () => {
    await pruneBefore(store.retention, T0 + 5 * DAY);
    tamper((db) =>
      db.prepare("INSERT INTO scored_requests SELECT 3, 'forged', batch_id, received_at, model_sha256, model_name, model_version, features, tags, label, probabilities, margin, in_domain, review, domain, latency_us, key_label, chain_hash, explained FROM scored_requests WHERE seq = 6").run(),
    );
    expect(store.verifyChain().problem).toMatchObject({ kind: 'inserted', seq: 3 });
  });
});
