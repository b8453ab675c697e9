import { copyFileSync, existsSync, renameSync, rmSync } from 'node:fs';
import BetterSqlite3 from 'better-sqlite3';
import { afterAll, describe, expect, it } from 'vitest';
import { auditVerifyAction } from '../../src/cli/actions/audit.js';
import { headFilePath, readHeadFile } from '../../src/store/head-file.js';
import { LogWriteError, type ScoredRow } from '../../src/store/request-log.js';
import { StoreIntegrityError, type SqliteStore as Store, openStore } from '../../src/store/store.js';
import { tempDir } from '../helpers/datasets.js';
import { sink } from '../helpers/sink.js';

// The database's files changed under a running server, and the chain head kept beside them
// (issue 19, fault 4).

const tmp = tempDir();
afterAll(() => tmp.remove());
const MODEL = { sha256: 'd'.repeat(64), name: 'm', version: '1' };
let n = 0;
const row = (): ScoredRow => {
  n++;
  return { requestId: `f-${n}`, batchId: null, receivedAt: 1_790_000_000_000 + n, model: MODEL, features: [n, 1, 2], tags: null, label: 'x', probabilities: [0.6, 0.4], margin: 0.2, inDomain: true, review: false, domain: { checks: [], outside: [] }, latencyUs: 3 };
};

function serving(file: string, fenced: string[] = []): Store {
  const store = openStore(file, { sync: 'normal', flushMs: 0, flushRows: 512, queueRows: 10_000, rejectedRows: 10, backgroundCheckpoints: true, serve: { version: 'test', onFenced: (r) => fenced.push(r) } });
  store.recordModel({ ...MODEL, features: [{ name: 'a', unit: '' }, { name: 'b', unit: '' }, { name: 'c', unit: '' }], classes: ['x', 'y'] });
  return store;
}

async function until(check: () => boolean, ms = 10_000): Promise<boolean> {
  const deadline = Date.now() + ms;
  while (!check()) {
    if (Date.now() > deadline) return false;
    await new Promise((r) => setTimeout(r, 50));
  }
  return true;
}

const count = (file: string): number => {
  const db = new BetterSqlite3(file, { readonly: true });
  try {
    return (db.prepare('SELECT COUNT(*) AS n FROM scored_requests').get() as { n: number }).n;
  } finally {
    db.close();
  }
};

describe('the database files removed or replaced under a running server', () => {
  it('a removed WAL: stops acknowledging, goes unready, and keeps what it had answered', async () => {
    const file = tmp.file('wal-removed.db');
    const fenced: string[] = [];
    const store = serving(file, fenced);
    for (let i = 0; i < 50; i++) await store.log.append([row(), row()]);
    expect(store.writeState().writable).toBe(true);
    // as in a server that has run a while: the checkpoint thread has its connection open
    expect(await until(() => (store.checkpoints()?.runs ?? 0) > 0)).toBe(true);
    rmSync(`${file}-wal`);
    // rows answered after the removal and before it is seen land in the removed file; on a busy
    // machine the removal may be seen before all ten are sent, and what follows is refused
    let answered = 0;
    for (let i = 0; i < 10; i++) {
      const ok = await store.log.append([row()]).then(
        () => true,
        (err: unknown) => {
          expect(err).toBeInstanceOf(LogWriteError);
          return false;
        },
      );
      if (!ok) break;
      answered++;
    }
    expect(await until(() => !store.writeState().writable)).toBe(true);
    expect(store.writeState().reason).toMatch(/wal-removed\.db-wal was removed while the service had it open; nothing more is acknowledged/);
    expect(fenced).toHaveLength(1);
    await expect(store.log.append([row()])).rejects.toBeInstanceOf(LogWriteError);
    store.close();
    // Every row answered is in the database file: what was left in the removed WAL was copied in.
    // (and a row refused in flight may be there too: never a 200 for a row that is not)
    const kept = count(file);
    expect(kept).toBeGreaterThanOrEqual(100 + answered);
    expect(kept).toBeLessThanOrEqual(100 + answered + (answered < 10 ? 1 : 0));
  });

  it('a replaced database file: stops acknowledging and goes unready', async () => {
    const file = tmp.file('replaced.db');
    const store = serving(file);
    for (let i = 0; i < 20; i++) await store.log.append([row()]);
    // an older copy put over the live file, as a careless restore would
    const copy = tmp.file('replaced-copy.db');
    copyFileSync(file, copy);
    renameSync(copy, file);
    expect(await until(() => !store.writeState().writable)).toBe(true);
    expect(store.writeState().reason).toMatch(/replaced\.db was replaced by another file while the service had it open/);
    await expect(store.log.append([row()])).rejects.toBeInstanceOf(LogWriteError);
    store.close();
  });
});

describe('the chain head kept beside the database', () => {
  it('is written at checkpoints, and lets audit verify name rows cut from the end without --head', async () => {
    const file = tmp.file('cut.db');
    const store = serving(file);
    for (let i = 0; i < 30; i++) await store.log.append([row()]);
    const head = headFilePath(file);
    // written by the checkpoint thread within a pass or two
    expect(await until(() => (readHeadFile(head) as { seq?: number } | null)?.seq === 30)).toBe(true);
    store.close();
    expect(readHeadFile(head)).toMatchObject({ format: 'plumbline-chain-head/1', seq: 30, hash: expect.stringMatching(/^[0-9a-f]{64}$/) });

    const before = sink();
    expect(auditVerifyAction({ db: file, json: false }, { stdout: before, stderr: sink(), interactive: false })).toMatchObject({ intact: true, head_file: { state: 'held', seq: 30 } });
    expect(before.text()).toMatch(/the log holds the head kept in .*cut\.db\.head \(row 30, written /);

    // the last three rows cut: the rows left still chain, so only the head shows the cut
    const raw = new BetterSqlite3(file);
    raw.prepare('DELETE FROM scored_requests WHERE seq > 27').run();
    raw.close();
    const out = sink();
    const v = auditVerifyAction({ db: file, json: false }, { stdout: out, stderr: sink(), interactive: false });
    expect(v).toMatchObject({ intact: false, rows: 27, problem: { kind: 'removed', seq: 30 }, head_file: { state: 'removed' } });
    expect(out.text()).toMatch(/^NOT intact: removed at row 30\nthe log ends at row 27, but row 30 was recorded: rows from 28 on were removed \(the head kept in .*cut\.db\.head, written /);
    // --no-head-file verifies as before
    expect(auditVerifyAction({ db: file, json: true, headFile: false }, { stdout: sink(), stderr: sink(), interactive: false })).toMatchObject({ intact: true, head_file: { state: 'ignored' } });

    // and the server does not start on it, saying what to do
    expect(() => serving(file)).toThrow(StoreIntegrityError);
    expect(() => serving(file)).toThrow(/the chain head kept in .*cut\.db\.head is not in the log: the log ends at row 27.*move .*cut\.db\.head aside/);
    // with the head file moved aside (kept), it serves again, and keeps a new one
    renameSync(head, `${head}.cut`);
    const again = serving(file);
    await again.log.append([row()]);
    again.close();
    expect(readHeadFile(head)).toMatchObject({ seq: 28 });
    expect(existsSync(`${head}.cut`)).toBe(true);
  });

  it('keeps the outcome head too, and lets audit verify and the start name outcomes cut from the end', async () => {
    const file = tmp.file('outcomes-cut.db');
    const head = headFilePath(file);
    const store = serving(file);
    const rows = Array.from({ length: 10 }, row);
    await store.log.append(rows);
    store.outcomes.record(rows.map((r, i) => ({ requestId: r.requestId, label: i % 3 ? 'x' : 'y', observedAt: null, source: 'gauge', replace: false })), 'qa');
    store.close();
    const kept = readHeadFile(head) as { seq: number; outcomes?: { seq: number; hash: string } };
    expect(kept).toMatchObject({ seq: 10, outcomes: { seq: 10, hash: expect.stringMatching(/^[0-9a-f]{64}$/) } });
    // the file names the hash the outcome chain itself ends with
    const io = () => ({ stdout: sink(), stderr: sink(), interactive: false });
    expect(auditVerifyAction({ db: file, json: true }, io())).toMatchObject({ intact: true, outcomes: { intact: true, rows: 10, head: kept.outcomes } });

    // the last two outcomes cut: the outcomes left still chain, so only the head shows the cut
    const raw = new BetterSqlite3(file);
    raw.prepare('DELETE FROM outcomes WHERE seq > 8').run();
    raw.close();
    const out = sink();
    const v = auditVerifyAction({ db: file, json: false }, { stdout: out, stderr: sink(), interactive: false });
    expect(v).toMatchObject({ intact: false, outcomes: { intact: false, rows: 8, problem: { kind: 'removed', seq: 10 } } });
    expect(out.text()).toMatch(/outcomes NOT intact: removed at outcome 10\nthe outcomes end at 8, but outcome 10 was recorded: outcomes from 9 on were removed \(the outcome head kept in .*outcomes-cut\.db\.head, written /);
    // the server does not start on it, so that new outcomes cannot chain over the cut
    expect(() => serving(file)).toThrow(/the chain head kept in .*outcomes-cut\.db\.head is not in the log: the outcomes end at 8/);
  });
});
