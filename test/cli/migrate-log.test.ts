// plumbline migrate-log: a SQLite audit log copied into an empty PostgreSQL database keeps its
// chain (the same head as audit verify prints on the file), and a broken chain or a database
// that already holds a log is refused with nothing written. Skipped without a PostgreSQL server.
import BetterSqlite3 from 'better-sqlite3';
import { afterAll, describe, expect, it } from 'vitest';
import { auditVerifyAction, auditVerifyServerAction } from '../../src/cli/actions/audit.js';
import { migrateLogAction } from '../../src/cli/actions/migrate-log.js';
import { openStoreAt } from '../../src/store/open.js';
import { openStore } from '../../src/store/store.js';
import type { ScoredRow } from '../../src/store/request-log.js';
import { tempDir } from '../helpers/datasets.js';
import { freshDatabase, serverUrl, sql } from '../helpers/postgres.js';
import { sink } from '../helpers/sink.js';

const tmp = tempDir();
afterAll(() => tmp.remove());
const OPTIONS = { sync: 'normal', flushMs: 0, flushRows: 64, queueRows: 10_000, rejectedRows: 1000 } as const;
const MODEL = { sha256: 'e'.repeat(64), name: 'press', version: '1' };
const T0 = Date.parse('2026-11-01T00:00:00Z');
const io = () => ({ stdout: sink(), stderr: sink(), interactive: false });
const row = (i: number): ScoredRow => ({
  requestId: `m${i}`, batchId: null, receivedAt: T0 + i * 1000, model: MODEL, features: [i, -i], tags: i % 2 ? { line: 'L1' } : null, label: 'ok',
  probabilities: [0.6, 0.4], margin: 0.2, inDomain: true, review: false, domain: { checks: [], outside: [] }, latencyUs: 50, explained: i % 3 === 0,
});

/** A SQLite log of 2,500 rows, the first 500 pruned behind a checkpoint, with a key, a report and 300 outcomes (one replaced). */
async function sqliteLog(name: string): Promise<string> {
  const file = tmp.file(name);
  const s = openStore(file, OPTIONS);
  s.recordModel({ ...MODEL, features: [{ name: 'a', unit: 'mm' }, { name: 'b', unit: 'mm' }], classes: ['ok', 'bad'], bundle: '{}' });
  for (let i = 0; i < 2500; i += 100) await s.log.append(Array.from({ length: 100 }, (_, j) => row(i + j)));
  s.retention.pruneStep(T0 + 500 * 1000, 10_000, T0);
  s.keys.create({ id: 'k1', prefix: 'plk_aaaaaa', hash: 'ab'.repeat(32), role: 'admin', label: 'ops', createdAt: T0 });
  s.drift.saveReport({ id: 'd1', model_name: 'press', model_sha256: MODEL.sha256, window_from: T0, window_to: T0 + 86_400_000, created_at: T0, trigger: 'nightly', report: {} });
  const outcome = (i: number, label: string) => ({ requestId: `m${i}`, label, observedAt: i % 2 ? T0 + i : null, source: i % 3 ? 'gauge' : null, replace: true });
  s.outcomes.record(Array.from({ length: 299 }, (_, k) => outcome(600 + k * 5, k % 4 ? 'ok' : 'bad')), 'qa', T0 + 1);
  s.outcomes.record([outcome(600, 'ok')], null, T0 + 2);
  s.close();
  return file;
}

describe.skipIf(serverUrl === null)('plumbline migrate-log', () => {
  it('copies every table and keeps the chain: the server verifies to the head the file had, and replicas chain on', async () => {
    const file = await sqliteLog('copy.db');
    const before = auditVerifyAction({ db: file, json: true, headFile: false }, io());
    const url = await freshDatabase();
    const t = io();
    const out = await migrateLogAction({ from: file, to: url }, t);
    expect(out.rows).toMatchObject({ scored_requests: 2000, retention_cuts: 1, api_keys: 1, drift_reports: 1, models: 1, outcomes: 300 });
    expect(out.verdict).toMatchObject({ intact: true, rows: 2000, from: { seq: 500, cut: true }, head: before.head });
    expect(t.stdout.text()).toContain(`head ${before.head.seq}:${before.head.hash}`);
    // the outcome chain too: the same head as on the file, checked by audit verify on the URL
    expect(before.outcomes).toMatchObject({ intact: true, rows: 300 });
    expect(out.outcomes).toEqual(before.outcomes);
    expect(t.stdout.text()).toContain(`outcomes intact on the server: 300 outcomes chain to 300 (head 300:${before.outcomes!.head.hash})`);
    const audited = await auditVerifyServerAction({ db: url, json: true }, io());
    expect(audited).toMatchObject({ intact: true, head: before.head, outcomes: before.outcomes });
    expect(t.stdout.text()).not.toContain(new URL(url).password || 'no-password');
    // a replica on the URL chains on after the copied head
    const store = await openStoreAt(url, OPTIONS);
    await store.log.append([row(9000)]);
    expect(await store.verifyChain()).toMatchObject({ intact: true, rows: 2001, head: { seq: 2501 } });
    expect((await store.queryRequests({ tags: [['line', 'L1']] }, 1)).items[0]?.request_id).toBe('m2499');
    // outcomes recorded on the server chain on after the copied ones, and see them
    expect(await store.outcomes.record([{ requestId: 'm600', label: 'bad', observedAt: null, source: null, replace: false }, { requestId: 'm601', label: 'bad', observedAt: null, source: null, replace: false }], 'qa')).toEqual([
      { requestId: 'm600', status: 'refused', reason: 'conflict', detail: expect.any(String), recorded: 'ok' },
      { requestId: 'm601', status: 'recorded' },
    ]);
    expect(await store.outcomes.verifyChain()).toMatchObject({ intact: true, rows: 301, head: { seq: 301 } });
    await store.drift.saveReport({ id: 'd2', model_name: 'press', model_sha256: MODEL.sha256, window_from: T0 + 1, window_to: T0 + 2, created_at: T0, trigger: 'request', report: {} });
    await store.close();
    expect(await sql(url, 'SELECT id FROM drift_reports ORDER BY seq')).toEqual([{ id: 'd1' }, { id: 'd2' }]);
  });

  it('refuses a file whose chain is broken, and a database that already holds a log, writing nothing', async () => {
    const file = await sqliteLog('broken.db');
    const raw = new BetterSqlite3(file);
    raw.prepare("UPDATE scored_requests SET label = 'bad' WHERE seq = 1200").run();
    raw.close();
    const url = await freshDatabase();
    await expect(migrateLogAction({ from: file, to: url }, io())).rejects.toThrow(/hash chain is not intact \(changed at row 1200/);
    expect(await sql(url, 'SELECT COUNT(*)::int AS n FROM scored_requests')).toEqual([{ n: 0 }]);
    expect(await sql(url, 'SELECT COUNT(*)::int AS n FROM models')).toEqual([{ n: 0 }]);
    const tampered = await sqliteLog('tampered-outcome.db');
    const rw = new BetterSqlite3(tampered);
    rw.prepare("UPDATE outcomes SET source = 'gauge 9' WHERE seq = 150").run();
    rw.close();
    await expect(migrateLogAction({ from: tampered, to: url }, io())).rejects.toThrow(/outcome chain is not intact \(changed at outcome 150/);
    expect(await sql(url, 'SELECT COUNT(*)::int AS n FROM scored_requests')).toEqual([{ n: 0 }]);
    expect(await sql(url, 'SELECT COUNT(*)::int AS n FROM outcomes')).toEqual([{ n: 0 }]);
    const good = await sqliteLog('good.db');
    await migrateLogAction({ from: good, to: url }, io());
    await expect(migrateLogAction({ from: good, to: url }, io())).rejects.toThrow(/already holds an audit log \(chain head at row 2500\)/);
  });

  it('refuses a file whose text holds a NUL that PostgreSQL cannot keep, naming table, row and column, writing nothing', async () => {
    const file = await sqliteLog('nul.db');
    // an outcome recorded before the service refused a NUL in source: chained, so verify passes
    const s = openStore(file, OPTIONS);
    s.outcomes.record([{ requestId: 'm2400', label: 'bad', observedAt: null, source: 'gauge\u00007', replace: true }], 'qa', T0 + 3);
    s.close();
    expect((await auditVerifyAction({ db: file, json: false }, io())).outcomes).toMatchObject({ intact: true, rows: 301 });
    const url = await freshDatabase();
    await expect(migrateLogAction({ from: file, to: url }, io())).rejects.toThrow(/nul\.db: outcomes row 301 holds a NUL character in source, which PostgreSQL text cannot hold; nothing was copied/);
    expect(await sql(url, 'SELECT COUNT(*)::int AS n FROM scored_requests')).toEqual([{ n: 0 }]);
    expect(await sql(url, 'SELECT COUNT(*)::int AS n FROM outcomes')).toEqual([{ n: 0 }]);
  });
});
