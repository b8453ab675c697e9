// Three replicas on three ports and one PostgreSQL database, four clients spreading requests over
// them, one replica killed with SIGKILL halfway. Afterwards: every acknowledged request id is in
// the log, the one chain verifies, one nightly report per model exists after the job fired on all
// three, and the receiver got each alert event id at least once with the same payload each time.
// Skipped without a PostgreSQL server (test/helpers/postgres-global.ts says why).
import type { ChildProcess } from 'node:child_process';
import { once } from 'node:events';
import { afterAll, describe, expect, it } from 'vitest';
import { verifyServerLog } from '../../src/store/postgres/open.js';
import { SHOT, startChild } from '../helpers/scoring-load.js';
import { freshDatabase, serverUrl, sql } from '../helpers/postgres.js';
import { startReceiver } from '../helpers/webhooks.js';

const SECRET = `whsec_${Buffer.from('replica-test-secret-bytes-32-long').toString('base64')}`;
const children: ChildProcess[] = [];
afterAll(() => {
  for (const c of children) if (c.exitCode === null && c.signalCode === null) c.kill('SIGKILL');
});

/** One client: scores on each replica in turn, skipping one that stopped answering. */
function client(urls: string[], w: number, acknowledged: string[], state: { running: boolean }): Promise<void> {
  const dead = new Set<string>();
  return (async () => {
    for (let i = 0; state.running; i++) {
      const url = urls[(i + w) % urls.length] as string;
      if (dead.has(url)) continue;
      try {
        const batch = i % 5 === 0;
        const body = batch ? { items: [{ features: SHOT, tags: { w: String(w) } }, { features: SHOT }] } : { features: SHOT, tags: { w: String(w), i: String(i) } };
        const res = await fetch(`${url}/v1/models/moulding-quality/${batch ? 'score-batch' : 'score'}`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify(body) });
        if (res.status !== 200) continue;
        const answer = (await res.json()) as { request_id?: string; items?: Array<{ request_id: string }> };
        // Only an answer read whole counts as acknowledged.
        if (answer.items) acknowledged.push(...answer.items.map((a) => a.request_id));
        else acknowledged.push(answer.request_id as string);
      } catch {
        dead.add(url); // the connection died with the replica
      }
    }
  })();
}

async function until(check: () => Promise<boolean> | boolean, ms: number): Promise<void> {
  const end = Date.now() + ms;
  while (!(await check())) {
    if (Date.now() > end) throw new Error('timed out');
    await new Promise((r) => setTimeout(r, 200));
  }
}

describe.skipIf(serverUrl === null)('three replicas on one PostgreSQL, one killed with SIGKILL', () => {
  it('lose no acknowledged answer, keep one chain, make one nightly report, and deliver every alert event', async () => {
    const db = await freshDatabase();
    const receiver = await startReceiver();
    const config = {
      limits: { requests_per_minute: 0 },
      // The nightly job makes good yesterday's run at start, on every replica.
      reports: { schedule: '0 2 * * *', timezone: 'UTC' },
      alerts: {
        check_every: '1s',
        // Always true under this traffic (the margin is positive): raised once, by one replica.
        rules: [{ name: 'margin-watch', model: '*', signal: 'mean_margin', above: 0, window: '1m', min_requests: 5, notify: ['plant-ops'] }],
        webhooks: { 'plant-ops': { url: receiver.url, secret: SECRET, timeout_s: 5 } },
      },
    };
    const replicas = await Promise.all([0, 1, 2].map(() => startChild(db, config)));
    children.push(...replicas.map((r) => r.child));
    const urls = replicas.map((r) => r.url);
    const acknowledged: string[] = [];
    const state = { running: true };
    const clients = [0, 1, 2, 3].map((w) => client(urls, w, acknowledged, state));

    await until(() => acknowledged.length >= 1500, 60_000);
    const victim = replicas[1]!.child;
    victim.kill('SIGKILL');
    await once(victim, 'exit');
    const atKill = acknowledged.length;
    await until(() => acknowledged.length >= atKill + 1500, 60_000);
    state.running = false;
    await Promise.all(clients);

    // The alert event(s) in the outbox reach the receiver, whichever replica delivers them.
    const events = async () => sql<{ event_id: string; body: string }>(db, 'SELECT DISTINCT event_id, body FROM outbox');
    await until(async () => {
      const want = await events();
      const got = new Set(receiver.received.map((r) => r.headers['webhook-id']));
      return want.length > 0 && want.every((e) => got.has(e.event_id));
    }, 60_000);

    const ids = new Set((await sql<{ request_id: string }>(db, 'SELECT request_id FROM scored_requests')).map((r) => r.request_id));
    const missing = acknowledged.filter((id) => !ids.has(id));
    const chain = await verifyServerLog(db);
    const nightly = await sql<{ model_name: string; n: number }>(db, "SELECT model_name, COUNT(*)::int AS n FROM drift_reports WHERE trigger = 'nightly' GROUP BY model_name");
    const outbox = await events();
    const byEvent = new Map<string, Set<string>>();
    for (const r of receiver.received) {
      const id = String(r.headers['webhook-id']);
      byEvent.set(id, (byEvent.get(id) ?? new Set()).add(r.body));
    }
    console.info(
      `3 replicas, 4 clients, replica 2 killed after ${atKill} answers: ${acknowledged.length} acknowledged, ${missing.length} missing, ${ids.size} rows in the log; ` +
        `chain intact ${chain.intact} over ${chain.rows} rows; nightly reports ${JSON.stringify(nightly)}; ${outbox.length} alert event(s), ${receiver.received.length} deliveries received`,
    );
    expect(missing).toEqual([]);
    expect(chain).toMatchObject({ intact: true, rows: ids.size });
    expect(nightly).toEqual([{ model_name: 'moulding-quality', n: 1 }]);
    // one alert raised across the replicas; every event id delivered at least once, one payload each
    expect(await sql(db, 'SELECT COUNT(*)::int AS n FROM alerts')).toEqual([{ n: 1 }]);
    for (const e of outbox) expect(byEvent.get(e.event_id)).toEqual(new Set([e.body]));

    for (const r of [replicas[0]!, replicas[2]!]) {
      r.child.kill('SIGTERM');
      await once(r.child, 'exit');
    }
    await receiver.close();
  }, 180_000);
});
