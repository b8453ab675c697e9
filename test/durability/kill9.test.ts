import { once } from 'node:events';
import BetterSqlite3 from 'better-sqlite3';
import { afterAll, describe, expect, it } from 'vitest';
import { checkAnchor, verifyChain } from '../../src/store/audit-verify.js';
import { headFilePath, readHeadFile } from '../../src/store/head-file.js';
import { tempDir } from '../helpers/datasets.js';
import { load, startChild } from '../helpers/scoring-load.js';

const tmp = tempDir();
afterAll(() => tmp.remove());
describe('kill -9 under load', () => {
  it('loses no acknowledged request, keeps the chain intact and the database sound, restart after restart', async () => {
    const db = tmp.file('killed.db');
    const acknowledged: string[] = [];
    for (let round = 0; round < 3; round++) {
      const { child, url } = await startChild(db);
      const l = load(url, 8);
      // let it take load for a while (at least 200 answers), then kill it mid-flight
      const until = Date.now() + 5000;
      while (l.acknowledged.length < 200 + round * 50 && Date.now() < until) await new Promise((r) => setTimeout(r, 20));
      // and until the head kept beside the database names a row of this round
      const headUntil = Date.now() + 10_000;
      while (((readHeadFile(headFilePath(db)) as { seq?: number } | null)?.seq ?? 0) <= acknowledged.length && Date.now() < headUntil) await new Promise((r) => setTimeout(r, 50));
      child.kill('SIGKILL');
      await once(child, 'exit');
      await l.stop();
      acknowledged.push(...l.acknowledged);
      expect(l.acknowledged.length).toBeGreaterThanOrEqual(200);
    }
    const check = new BetterSqlite3(db);
    const ids = new Set((check.prepare('SELECT request_id FROM scored_requests').all() as Array<{ request_id: string }>).map((r) => r.request_id));
    const missing = acknowledged.filter((id) => !ids.has(id));
    const integrity = check.pragma('integrity_check', { simple: true });
    const chain = verifyChain(check);
    // The head kept beside the database never runs ahead of what a crash keeps.
    const head = readHeadFile(headFilePath(db));
    const anchor = head && !(head instanceof Error) ? checkAnchor(check, head) : null;
    check.close();
    console.info(`kill -9 x3 under 8 clients: ${acknowledged.length} acknowledged, ${missing.length} missing, ${ids.size} rows committed; integrity_check ${integrity}; chain intact ${chain.intact} over ${chain.rows} rows`);
    expect(missing).toEqual([]);
    expect(integrity).toBe('ok');
    expect(chain).toMatchObject({ intact: true, rows: ids.size });
    expect(anchor).toEqual({ outcome: 'held' });
  }, 60_000);
});
