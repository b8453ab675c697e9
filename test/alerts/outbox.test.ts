import { createServer, type Socket } from 'node:net';
import type { AddressInfo } from 'node:net';
import { join } from 'node:path';
import BetterSqlite3 from 'better-sqlite3';
import { pino } from 'pino';
import { afterAll, describe, expect, it } from 'vitest';
import { createDeliverer } from '../../src/alerts/outbox.js';
import { secretKey } from '../../src/alerts/signing.js';
import { configSchema } from '../../src/config/config.js';
import { startServer } from '../../src/http/server.js';
import { openStore } from '../../src/store/store.js';
import { tempDir } from '../helpers/datasets.js';
import { DEMO_DIR } from '../helpers/demo.js';
import { startReceiver } from '../helpers/webhooks.js';

// A receiver that accepts the connection and never answers must hold back only its own
// deliveries (issue 19, fault 5).

const SECRET = 'whsec_cGxhbnQtb3BzLXRlc3Qtc2VjcmV0LWJ5dGVz';
const tmp = tempDir();
afterAll(() => tmp.remove());

/** Accepts TCP connections and reads requests, and never answers. */
async function startSilentReceiver(): Promise<{ url: string; connections: () => number; close(): Promise<void> }> {
  const sockets = new Set<Socket>();
  let seen = 0;
  const server = createServer((s) => {
    seen++;
    sockets.add(s);
    s.on('data', () => undefined);
    s.on('error', () => undefined);
    s.on('close', () => sockets.delete(s));
  });
  await new Promise<void>((r) => server.listen(0, '127.0.0.1', r));
  const { port } = server.address() as AddressInfo;
  return {
    url: `http://127.0.0.1:${port}/hooks/silent`,
    connections: () => seen,
    close: () =>
      new Promise<void>((r) => {
        for (const s of sockets) s.destroy();
        server.close(() => r());
      }),
  };
}

const sleep = (ms: number) => new Promise<'timeout'>((r) => setTimeout(() => r('timeout'), ms));

async function until(check: () => boolean, ms = 10_000): Promise<boolean> {
  const deadline = Date.now() + ms;
  while (!check()) {
    if (Date.now() > deadline) return false;
    await new Promise((r) => setTimeout(r, 25));
  }
  return true;
}

const ALERT = { id: 'a-1', rule: 'r', model_name: 'm', signal: 'out_of_domain_rate', direction: 'above' as const, threshold: 0.05, window_ms: 600_000, raised_value: 0.2, raised_at: 0 };

describe('webhook deliveries', () => {
  it("to one receiver never wait on another's: a receiver that never answers holds back only its own", async () => {
    const silent = await startSilentReceiver();
    const ops = await startReceiver();
    const store = openStore(tmp.file('outbox.db'), { sync: 'normal', flushMs: 0, flushRows: 1, queueRows: 10, rejectedRows: 10 });
    try {
      const T = 1_790_000_000_000;
      store.alerts.raise({ ...ALERT, raised_at: T }, [
        { eventId: 'e-silent', webhook: 'silent', orderingKey: 'r/m', body: '{"n":1}' },
        { eventId: 'e-ops', webhook: 'ops', orderingKey: 'r/m', body: '{"n":2}' },
      ], T);
      const key = secretKey(SECRET);
      const deliverer = createDeliverer({
        store: store.alerts,
        webhooks: { silent: { url: silent.url, key, timeoutMs: 120_000 }, ops: { url: ops.url, key, timeoutMs: 2000 } },
        policy: { retryBase: 10, retryCap: 100, giveUpAfter: 3_600_000 },
        log: pino({ level: 'silent' }),
      });
      ops.down = true;
      // The first pass: the silent receiver takes the connection and hangs; ops answers 503.
      const first = deliverer.tick(T);
      expect(await until(() => silent.connections() > 0 && store.alerts.deliveries().find((d) => d.event_id === 'e-ops')!.attempts === 1)).toBe(true);
      ops.down = false;
      // ops's retry is due a moment later: it must go while the silent one still hangs.
      const second = await Promise.race([deliverer.tick(T + 1000), sleep(10_000)]);
      expect(second).not.toBe('timeout');
      expect(ops.received.map((r) => r.body)).toEqual(['{"n":2}']);
      const rows = Object.fromEntries(store.alerts.deliveries().map((d) => [d.event_id, d.status]));
      expect(rows).toEqual({ 'e-silent': 'pending', 'e-ops': 'delivered' });
      await deliverer.stop();
      // The hanging attempt was abandoned, not failed: the delivery stays pending for the next start.
      await first;
      expect(store.alerts.deliveries().find((d) => d.event_id === 'e-silent')).toMatchObject({ status: 'pending', attempts: 0 });
    } finally {
      store.close();
      await silent.close();
      await ops.close();
    }
  });

  it('a server counts pending deliveries in plumbline_outbox_depth, and SIGTERM during a hanging delivery closes the store cleanly', async () => {
    const silent = await startSilentReceiver();
    const db = tmp.file('server-outbox.db');
    const config = configSchema.parse({
      port: 0,
      models_dir: join(DEMO_DIR, 'models'),
      db,
      logger: { level: 'silent' },
      reports: { schedule: 'off' },
      alerts: { webhooks: { silent: { url: silent.url, secret: SECRET, timeout_s: 120 } } },
    });
    const server = await startServer(config, { timers: false });
    let closed = false;
    try {
      const T = Date.now();
      server.runtime.store.alerts.raise({ ...ALERT, raised_at: T }, [1, 2, 3, 4].map((i) => ({ eventId: `e-${i}`, webhook: 'silent', orderingKey: `r/m${i}`, body: `{"n":${i}}` })), T);
      void server.runtime.alerting.tick(T);
      expect(await until(() => silent.connections() === 4)).toBe(true);
      const metrics = await server.app.inject('/metrics');
      expect(metrics.body).toMatch(/^plumbline_outbox_depth 4$/m);
      // SIGTERM's path: close everything while the four deliveries hang
      const done = await Promise.race([server.close().then(() => 'closed' as const), sleep(10_000)]);
      closed = done === 'closed';
      expect(done).toBe('closed');
      const check = new BetterSqlite3(db, { readonly: true });
      expect(check.prepare("SELECT COUNT(*) AS n FROM outbox WHERE status = 'pending' AND attempts = 0").get()).toEqual({ n: 4 });
      expect(check.pragma('integrity_check', { simple: true })).toBe('ok');
      check.close();
    } finally {
      if (!closed) await server.close();
      await silent.close();
    }
  });
});
