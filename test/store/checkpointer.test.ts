import { statSync } from 'node:fs';
import BetterSqlite3 from 'better-sqlite3';
import { afterAll, describe, expect, it } from 'vitest';
import type { ScoredRow } from '../../src/store/request-log.js';
import { openStore } from '../../src/store/store.js';
import { tempDir } from '../helpers/datasets.js';

const tmp = tempDir();
afterAll(() => tmp.remove());
const MODEL = { sha256: 'f'.repeat(64), name: 'm', version: '1' };
const row = (i: number): ScoredRow => ({ requestId: `c-${i}`, batchId: null, receivedAt: 1_790_000_000_000 + i, model: MODEL, features: [i, i / 2, i / 3], tags: null, label: 'x', probabilities: [0.7, 0.3], margin: 0.4, inDomain: true, review: false, domain: { checks: [], outside: [] }, latencyUs: 5 });

describe('background WAL checkpoints', () => {
  it('run on a worker thread while commits stop checkpointing, and lose nothing', async () => {
    const file = tmp.file('ckpt.db');
    const store = openStore(file, { sync: 'normal', flushMs: 0, flushRows: 512, queueRows: 100_000, rejectedRows: 10, backgroundCheckpoints: true });
    store.recordModel({ ...MODEL, features: [{ name: 'a', unit: '' }, { name: 'b', unit: '' }, { name: 'c', unit: '' }], classes: ['x', 'y'] });
    // about 5,000 pages of WAL: well past the 1,000 at which a commit would checkpoint inline
    for (let b = 0; b < 20; b++) await store.log.append(Array.from({ length: 1000 }, (_, i) => row(b * 1000 + i)));
    const walBefore = statSync(`${file}-wal`).size;
    const deadline = Date.now() + 5000;
    while ((store.checkpoints()?.runs ?? 0) < 2 && Date.now() < deadline) await new Promise((r) => setTimeout(r, 100));
    expect(store.checkpoints()).toMatchObject({ inline: false, lastError: null });
    expect(store.checkpoints()!.runs).toBeGreaterThanOrEqual(2);
    // the worker copied the WAL into the database file, which commits alone no longer do
    expect(walBefore).toBeGreaterThan(1000 * 4096);
    expect(statSync(file).size).toBeGreaterThan(walBefore / 2);
    store.close();
    const check = new BetterSqlite3(file, { readonly: true });
    expect(check.prepare('SELECT COUNT(*) AS n FROM scored_requests').get()).toEqual({ n: 20_000 });
    expect(check.pragma('integrity_check', { simple: true })).toBe('ok');
    check.close();
  });
});
