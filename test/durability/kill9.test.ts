import { type ChildProcess, spawn } from 'node:child_process';
import { once } from 'node:events';
import { fileURLToPath } from 'node:url';
import BetterSqlite3 from 'better-sqlite3';
import { afterAll, describe, expect, it } from 'vitest';
import { verifyChain } from '../../src/store/audit-verify.js';
import { tempDir } from '../helpers/datasets.js';

const tmp = tempDir();
afterAll(() => tmp.remove());
const CHILD = fileURLToPath(new URL('../fixtures/serve-child.ts', import.meta.url));
const SHOT = [232.1, 53.8, 923, 478, 3.48, 14.18, 102, 5.4, 23.7, 47.93];

async function startChild(db: string): Promise<{ child: ChildProcess; url: string }> {
  const child = spawn(process.execPath, ['--import', 'tsx', CHILD, db], { stdio: ['ignore', 'pipe', 'inherit'] });
  let out = '';
  for await (const chunk of child.stdout as AsyncIterable<Buffer>) {
    out += chunk.toString();
    const line = out.split('\n').find((l) => l.startsWith('{'));
    if (line) return { child, url: (JSON.parse(line) as { url: string }).url };
  }
  throw new Error('the service exited before it listened');
}

/** Keeps `workers` clients scoring until stopped; returns the request ids answered 200. */
function load(url: string, workers: number): { acknowledged: string[]; stop(): Promise<void> } {
  const acknowledged: string[] = [];
  let running = true;
  const one = async (w: number): Promise<void> => {
    for (let i = 0; running; i++) {
      try {
        const body = i % 5 === 0 ? { items: [{ features: SHOT }, { features: SHOT, tags: { w: String(w) } }] } : { features: SHOT, tags: { w: String(w), i: String(i) } };
        const res = await fetch(`${url}/v1/models/moulding-quality/${i % 5 === 0 ? 'score-batch' : 'score'}`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify(body) });
        if (res.status !== 200) continue;
        const answer = (await res.json()) as { request_id?: string; items?: Array<{ request_id: string }> };
        // Only an answer read whole counts as acknowledged.
        if (answer.items) acknowledged.push(...answer.items.map((a) => a.request_id));
        else acknowledged.push(answer.request_id as string);
      } catch {
        return; // the connection died with the process
      }
    }
  };
  const all = Promise.all(Array.from({ length: workers }, (_, w) => one(w)));
  return {
    acknowledged,
    stop: async () => {
      running = false;
      await all;
    },
  };
}

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
    check.close();
    console.info(`kill -9 x3 under 8 clients: ${acknowledged.length} acknowledged, ${missing.length} missing, ${ids.size} rows committed; integrity_check ${integrity}; chain intact ${chain.intact} over ${chain.rows} rows`);
    expect(missing).toEqual([]);
    expect(integrity).toBe('ok');
    expect(chain).toMatchObject({ intact: true, rows: ids.size });
  }, 60_000);
});
