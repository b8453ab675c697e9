import { once } from 'node:events';
import { rmSync } from 'node:fs';
import BetterSqlite3 from 'better-sqlite3';
import { afterAll, describe, expect, it } from 'vitest';
import { auditVerifyAction } from '../../src/cli/actions/audit.js';
import { headFilePath, readHeadFile } from '../../src/store/head-file.js';
import { tempDir } from '../helpers/datasets.js';
import { SHOT, load, startChild } from '../helpers/scoring-load.js';
import { sink } from '../helpers/sink.js';

const tmp = tempDir();
afterAll(() => tmp.remove());

// The -wal file deleted under a running server, then kill -9 (issue 19, fault 4): the old code
// went on answering 200 into the deleted file, lost 418 of 16,149 answers at the kill, and
// audit verify said intact.
describe('the WAL removed under load, then kill -9', () => {
  it('stops acknowledging and goes unready; every answer given is in the log, or audit verify names the cut', async () => {
    const db = tmp.file('removed.db');
    const { child, url } = await startChild(db);
    try {
      const l = load(url, 8);
      const until = Date.now() + 10_000;
      // as in a server that has run a while: answers given, and a head kept beside the database
      while ((l.acknowledged.length < 300 || readHeadFile(headFilePath(db)) === null) && Date.now() < until) await new Promise((r) => setTimeout(r, 20));
      rmSync(`${db}-wal`);
      // readiness goes within a checkpoint's time or so
      let ready = 200;
      const deadline = Date.now() + 10_000;
      while (ready === 200 && Date.now() < deadline) {
        await new Promise((r) => setTimeout(r, 100));
        ready = (await fetch(`${url}/readyz`)).status;
      }
      expect(ready).toBe(503);
      const readyz = (await (await fetch(`${url}/readyz`)).json()) as { reason: string };
      expect(readyz.reason).toMatch(/removed\.db-wal was removed while the service had it open/);
      const refused = await fetch(`${url}/v1/models/moulding-quality/score`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ features: SHOT }) });
      expect(refused.status).toBe(503);
      expect(((await refused.json()) as { type: string }).type).toBe('urn:plumbline:problem:log-unavailable');
      child.kill('SIGKILL');
      await once(child, 'exit');
      await l.stop();

      const check = new BetterSqlite3(db, { readonly: true });
      const ids = new Set((check.prepare('SELECT request_id FROM scored_requests').all() as Array<{ request_id: string }>).map((r) => r.request_id));
      check.close();
      const missing = l.acknowledged.filter((id) => !ids.has(id));
      const out = sink();
      const verdict = auditVerifyAction({ db, json: false }, { stdout: out, stderr: sink(), interactive: false });
      console.info(`WAL removed under 8 clients, then kill -9: ${l.acknowledged.length} acknowledged, ${missing.length} missing; audit verify: ${out.text().split('\n')[0]}`);
      // The head file was written by this run, so it is checked, not absent.
      expect(['held', 'removed']).toContain(verdict.head_file.state);
      if (missing.length === 0) expect(verdict).toMatchObject({ intact: true, head_file: { state: 'held' } });
      else expect(verdict).toMatchObject({ intact: false, problem: { kind: 'removed' } });
    } finally {
      if (child.exitCode === null && child.signalCode === null) child.kill('SIGKILL');
    }
  }, 60_000);
});
