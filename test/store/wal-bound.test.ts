import { statSync } from 'node:fs';
import BetterSqlite3 from 'better-sqlite3';
import { afterAll, describe, expect, it } from 'vitest';
import type { ScoredRow } from '../../src/store/request-log.js';
import { openStore } from '../../src/store/store.js';
import { tempDir } from '../helpers/datasets.js';

const tmp = tempDir();
afterAll(() => tmp.remove());
const MODEL = { sha256: 'e'.repeat(64), name: 'm', version: '1' };
let n = 0;
const row = (): ScoredRow => {
  n++;
  return { requestId: `w-${n}`, batchId: null, receivedAt: 1_790_000_000_000 + n, model: MODEL, features: [n, n / 2, n / 3], tags: { line: '3' }, label: 'x', probabilities: [0.7, 0.3], margin: 0.4, inDomain: true, review: false, domain: { checks: [], outside: [] }, latencyUs: 5 };
};
const walSize = (file: string): number => statSync(`${file}-wal`, { throwIfNoEntry: false })?.size ?? 0;

const BOUND = 2 * 2 ** 20;

describe.each([
  ['on the event loop', false],
  ['on the writer thread', true],
] as const)('the write-ahead log under a steady stream of commits, %s', (_, writerThread) => {
  it('stays under log.wal_max_bytes, single rows and batches alike, and loses nothing', async () => {
    const file = tmp.file(`wal-${writerThread ? 'thread' : 'loop'}.db`);
    const store = openStore(file, { sync: 'normal', flushMs: 0, flushRows: 512, queueRows: 100_000, rejectedRows: 10, backgroundCheckpoints: true, writerThread, walMaxBytes: BOUND });
    store.recordModel({ ...MODEL, features: [{ name: 'a', unit: '' }, { name: 'b', unit: '' }, { name: 'c', unit: '' }], classes: ['x', 'y'] });
    // One commit per append: about 30 MiB of WAL frames in all, fifteen times the bound, written
    // back to back, so that the background checkpoints alone never find a quiet moment.
    let largest = 0;
    let rows = 0;
    for (let i = 0; i < 3000; i++) {
      const batch = i % 10 === 9 ? Array.from({ length: 200 }, row) : [row()];
      await store.log.append(batch);
      rows += batch.length;
      largest = Math.max(largest, walSize(file));
    }
    store.close();
    console.info(`${rows} rows in 3,000 commits ${writerThread ? 'on the writer thread' : 'on the event loop'}: largest WAL ${(largest / 2 ** 20).toFixed(2)} MiB, bound ${BOUND / 2 ** 20} MiB`);
    expect(largest).toBeLessThanOrEqual(BOUND);
    const check = new BetterSqlite3(file, { readonly: true });
    expect(check.prepare('SELECT COUNT(*) AS n FROM scored_requests').get()).toEqual({ n: rows });
    expect(check.pragma('integrity_check', { simple: true })).toBe('ok');
    check.close();
  });

  it('stays under it with many requests at once, while several batches are on their way to the writer', async () => {
    const file = tmp.file(`wal-concurrent-${writerThread ? 'thread' : 'loop'}.db`);
    const store = openStore(file, { sync: 'normal', flushMs: 0, flushRows: 512, queueRows: 100_000, rejectedRows: 10, backgroundCheckpoints: true, writerThread, walMaxBytes: BOUND });
    store.recordModel({ ...MODEL, features: [{ name: 'a', unit: '' }, { name: 'b', unit: '' }, { name: 'c', unit: '' }], classes: ['x', 'y'] });
    // Requests arriving while earlier ones wait, as on the service's connections: on the writer
    // thread up to four batches are posted before the first is answered, and the checkpoint that
    // holds the log must wait for them.
    let largest = 0;
    let rows = 0;
    const sampler = setInterval(() => (largest = Math.max(largest, walSize(file))), 5);
    // A new request every turn of the event loop, up to 64 unanswered: each turn's rows are a batch
    // of their own, posted while the batches before are still being committed.
    const outstanding = new Set<Promise<void>>();
    for (let i = 0; i < 2400; i++) {
      const batch = i % 5 === 4 ? Array.from({ length: 100 }, row) : [row()];
      const p: Promise<void> = store.log.append(batch).then(() => {
        rows += batch.length;
        outstanding.delete(p);
      });
      outstanding.add(p);
      if (outstanding.size >= 64) await Promise.race(outstanding);
      else await new Promise((resolve) => setImmediate(resolve));
      largest = Math.max(largest, walSize(file));
    }
    await Promise.all(outstanding);
    clearInterval(sampler);
    store.close();
    console.info(`${rows} rows, up to 64 requests waiting, ${writerThread ? 'on the writer thread' : 'on the event loop'}: largest WAL ${(largest / 2 ** 20).toFixed(2)} MiB, bound ${BOUND / 2 ** 20} MiB`);
    expect(largest).toBeLessThanOrEqual(BOUND);
    const check = new BetterSqlite3(file, { readonly: true });
    expect(check.prepare('SELECT COUNT(*) AS n FROM scored_requests').get()).toEqual({ n: rows });
    check.close();
  });
});
