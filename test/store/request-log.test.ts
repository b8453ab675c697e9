import { spawn } from 'node:child_process';
import { once } from 'node:events';
import { fileURLToPath } from 'node:url';
import BetterSqlite3, { type Database } from 'better-sqlite3';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { openDatabase } from '../../src/store/database.js';
import { fromFloat64Blob } from '../../src/store/float64-blob.js';
import { recordModel } from '../../src/store/models-table.js';
import { LogBackpressureError, LogClosedError, LogWriteError, type RequestLog, type ScoredRow, type WriterOptions, createRequestLog as createLog } from '../../src/store/request-log.js';
import { tempDir } from '../helpers/datasets.js';

const MODEL = { sha256: 'a'.repeat(64), name: 'm', version: '1' };
const tmp = tempDir();
let db: Database;
let file: string;
let n = 0;

function row(label = 'ok', features: number[] = [1.5, -2]): ScoredRow {
  n++;
  return {
    requestId: `req-${n}`,
    batchId: null,
    receivedAt: 1_800_000_000_000 + n,
    model: MODEL,
    features,
    tags: null,
    label,
    probabilities: [0.25, 0.75],
    margin: 0.5,
    inDomain: true,
    review: false,
    domain: { checks: [], outside: [] },
    latencyUs: 120,
  };
}

const options = (o: Partial<WriterOptions> = {}): WriterOptions => ({ flushMs: 0, flushRows: 512, queueRows: 10_000, rejectedRows: 100, ...o });
const committed = (): Array<{ request_id: string; label: string }> => db.prepare('SELECT request_id, label FROM scored_requests ORDER BY seq').all() as Array<{ request_id: string; label: string }>;

beforeEach(() => {
  file = tmp.file(`log-${Math.random().toString(36).slice(2)}.db`);
  db = openDatabase(file, { sync: 'normal' });
  recordModel(db, { ...MODEL, features: [{ name: 'a', unit: '' }, { name: 'b', unit: '' }], classes: ['x', 'y'] });
});
afterEach(() => db.close());

// Every behaviour holds wherever the commits run: on the event loop (the CLI) and on the writer
// thread (the service).
describe.each([
  ['on the event loop', false],
  ['on the writer thread', true],
] as const)('group-commit writer, %s', (_, threaded) => {
  // Each test's log is closed after it, so that no writer thread outlives its test.
  const logs: RequestLog[] = [];
  const createRequestLog = (d: Database, o: WriterOptions): RequestLog => {
    const log = createLog(d, o, threaded ? { file, sync: 'normal', autocheckpoint: true } : undefined);
    logs.push(log);
    return log;
  };
  afterEach(() => {
    for (const l of logs.splice(0)) l.close();
  });

  it('says where it commits', () => {
    const log = createRequestLog(db, options());
    expect(log.stats().writer).toBe(threaded ? 'thread' : 'event-loop');
    log.close();
  });

  it('commits every row of many concurrent requests, in the order they were queued, in one transaction', async () => {
    const log = createRequestLog(db, options());
    const rows = Array.from({ length: 300 }, () => [row()]);
    await Promise.all(rows.map((r) => log.append(r)));
    expect(committed().map((r) => r.request_id)).toEqual(rows.map((r) => r[0]!.requestId));
    expect(log.stats()).toMatchObject({ committedRows: 300, transactions: 1, failedRows: 0, waitingRows: 0 });
  });

  it('resolves a request only after its rows are committed', async () => {
    const log = createRequestLog(db, options({ flushMs: 20 }));
    const r = row();
    let done = false;
    const p = log.append([r]).then(() => (done = true));
    expect(committed()).toHaveLength(0);
    expect(done).toBe(false);
    await p;
    expect(committed().map((c) => c.request_id)).toEqual([r.requestId]);
  });

  it('stores vectors as float64 that read back exactly', async () => {
    const log = createRequestLog(db, options());
    const values = [0.1, -1e-300, 123456789.123456789, Math.PI];
    await log.append([row('ok', values)]);
    const stored = db.prepare('SELECT features FROM scored_requests').get() as { features: Buffer };
    expect(Array.from(fromFloat64Blob(stored.features))).toEqual(values);
  });

  it('splits a large queue into transactions of at most flushRows rows, never splitting a request', async () => {
    const log = createRequestLog(db, options({ flushRows: 10 }));
    await Promise.all([log.append(Array.from({ length: 6 }, () => row())), log.append(Array.from({ length: 6 }, () => row())), log.append([row()])]);
    expect(log.stats()).toMatchObject({ committedRows: 13, transactions: 2 });
  });

  it('answers a failed transaction as an error and commits none of its rows', async () => {
    db.exec("CREATE TRIGGER refuse BEFORE INSERT ON scored_requests BEGIN SELECT RAISE(ABORT, 'disk full'); END");
    const log = createRequestLog(db, options());
    await expect(log.append([row(), row()])).rejects.toBeInstanceOf(LogWriteError);
    expect(committed()).toHaveLength(0);
    expect(log.stats()).toMatchObject({ failedRows: 2, committedRows: 0 });
  });

  it('fails only the request whose row cannot be written when others share its transaction', async () => {
    db.exec("CREATE TRIGGER refuse BEFORE INSERT ON scored_requests WHEN NEW.label = 'poison' BEGIN SELECT RAISE(ABORT, 'bad row'); END");
    const log = createRequestLog(db, options());
    const before = row();
    const after = row();
    const results = await Promise.allSettled([log.append([before]), log.append([row('ok'), row('poison')]), log.append([after])]);
    expect(results.map((r) => r.status)).toEqual(['fulfilled', 'rejected', 'fulfilled']);
    expect(committed().map((c) => c.request_id)).toEqual([before.requestId, after.requestId]);
  });

  it('fails a whole group at once, without retrying request by request, when the database is locked', async () => {
    const other = new BetterSqlite3(file);
    other.exec('BEGIN IMMEDIATE'); // another process holds the write lock
    const log = createRequestLog(db, options());
    const results = await Promise.allSettled(Array.from({ length: 20 }, () => log.append([row()])));
    other.exec('ROLLBACK');
    other.close();
    expect(results.every((r) => r.status === 'rejected')).toBe(true);
    expect(log.stats()).toMatchObject({ failedRows: 20, failedTransactions: 1, committedRows: 0 });
    expect(committed()).toHaveLength(0);
  });

  it('commits at once, without waiting for flushMs, when flushRows rows are waiting', async () => {
    const log = createRequestLog(db, options({ flushMs: 600_000, flushRows: 10 }));
    const pending = Array.from({ length: 10 }, () => log.append([row()]));
    await Promise.all(pending); // would time out if the 10-minute timer were the only trigger
    expect(committed()).toHaveLength(10);
  });

  it('refuses rows beyond queueRows at once, instead of holding them in memory', async () => {
    const log = createRequestLog(db, options({ flushMs: 50, queueRows: 5 }));
    const first = log.append([row(), row(), row(), row()]);
    await expect(log.append([row(), row()])).rejects.toBeInstanceOf(LogBackpressureError);
    await first;
    expect(committed()).toHaveLength(4);
  });

  it('commits what waits when closed, and refuses rows after', async () => {
    const log = createRequestLog(db, options({ flushMs: 60_000 }));
    const p = log.append([row()]);
    log.close();
    expect(committed()).toHaveLength(1); // synchronously, not by the timer
    await p;
    await expect(log.append([row()])).rejects.toBeInstanceOf(LogClosedError);
  });

  it('keeps only the newest rejected requests, pruning in bulk', async () => {
    const log: RequestLog = createRequestLog(db, options({ rejectedRows: 100 }));
    for (let i = 0; i < 1500; i++) {
      log.appendRejected({ requestId: `r${i}`, receivedAt: i, method: 'POST', route: '/x', modelName: null, status: 400, problemType: 'invalid-request', bodyBytes: 3 });
      if (i % 500 === 499) log.flush();
    }
    log.flush();
    const count = (db.prepare('SELECT COUNT(*) AS n, MAX(request_id) AS newest FROM rejected_requests').get() as { n: number; newest: string });
    expect(count.n).toBeLessThanOrEqual(600);
    expect(count.n).toBeGreaterThanOrEqual(100);
    expect(db.prepare("SELECT 1 FROM rejected_requests WHERE request_id = 'r1499'").get()).toBeDefined();
  });

  it('loses nothing it acknowledged when the process is killed with SIGKILL (WAL, synchronous=NORMAL)', async () => {
    const crashFile = tmp.file(`crash-${threaded ? 'thread' : 'loop'}.db`);
    const child = spawn(process.execPath, ['--import', 'tsx', fileURLToPath(new URL('../fixtures/crash-writer.ts', import.meta.url)), crashFile, threaded ? 'thread' : 'loop'], { stdio: ['ignore', 'pipe', 'inherit'] });
    let out = '';
    child.stdout.on('data', (c: Buffer) => (out += c.toString()));
    const [, signal] = (await once(child, 'exit')) as [number | null, string | null];
    expect(signal).toBe('SIGKILL');
    const acknowledged = out.split('\n').filter(Boolean);
    expect(acknowledged.length).toBeGreaterThan(100);
    const reopened = openDatabase(crashFile, { sync: 'normal' });
    const present = new Set((reopened.prepare('SELECT request_id FROM scored_requests').all() as Array<{ request_id: string }>).map((r) => r.request_id));
    expect(acknowledged.filter((id) => !present.has(id))).toEqual([]);
    expect(reopened.pragma('integrity_check', { simple: true })).toBe('ok');
    reopened.close();
  });
});

describe('the writer thread', () => {
  it('falls back to the event loop when it cannot open the database, and loses no row', async () => {
    const log = createLog(db, options(), { file: tmp.file('missing/none.db'), sync: 'normal', autocheckpoint: true });
    const r = row();
    await log.append([r]);
    expect(committed().map((c) => c.request_id)).toEqual([r.requestId]);
    expect(log.stats()).toMatchObject({ writer: 'event-loop', committedRows: 1 });
    expect(log.stats().lastError).toMatch(/writer could not open/);
    log.close();
  });
});
