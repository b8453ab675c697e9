// PostgreSQL stopped under a running service, then started again: 503 problem+json for every
// score (never a 200 that was not committed), /readyz not ready, and recovery without a restart.
// A server of its own (the shared one must stay up for the other files); skipped without binaries.
import type { FastifyInstance } from 'fastify';
import { afterAll, describe, expect, it } from 'vitest';
import { configSchema } from '../../src/config/config.js';
import { buildApp } from '../../src/http/app.js';
import { openRuntime } from '../../src/runtime.js';
import { SHOT } from '../helpers/scoring-load.js';
import { type ThrowawayServer, serverBinaries, startThrowawayServer } from '../helpers/pg-server.js';
import { serverUrl, sql } from '../helpers/postgres.js';

const found = serverBinaries();
let server: ThrowawayServer | null = null;
let app: FastifyInstance | null = null;
afterAll(async () => {
  await app?.close();
  server?.remove();
});

const score = (a: FastifyInstance) => a.inject({ method: 'POST', url: '/v1/models/moulding-quality/score', payload: { features: SHOT } });

async function until(check: () => Promise<boolean>, ms: number): Promise<void> {
  const end = Date.now() + ms;
  while (!(await check())) {
    if (Date.now() > end) throw new Error('timed out');
    await new Promise((r) => setTimeout(r, 200));
  }
}

describe.skipIf(serverUrl === null || 'missing' in found)('the service while PostgreSQL is down', () => {
  it('answers 503 problem+json and not ready, and recovers by itself when the server is back', async () => {
    server = await startThrowawayServer((found as { bin: string }).bin);
    const config = configSchema.parse({ db: server.url, models_dir: 'demo-data/models', reports: { schedule: 'off' }, postgres: { connect_timeout_ms: 1000 } });
    const runtime = await openRuntime(config);
    app = await buildApp(runtime);
    await app.ready();
    const ok = await score(app);
    expect(ok.statusCode).toBe(200);
    expect((await app.inject({ url: '/readyz' })).statusCode).toBe(200);

    server.stop();
    const down = await score(app);
    expect(down.statusCode).toBe(503);
    expect(down.headers['content-type']).toMatch(/^application\/problem\+json/);
    expect(down.json()).toMatchObject({ status: 503, type: expect.stringMatching(/log-unavailable$/) });
    expect(JSON.stringify(down.json())).not.toContain(server.password);
    const batch = await app.inject({ method: 'POST', url: '/v1/models/moulding-quality/score-batch', payload: { items: [{ features: SHOT }, { features: SHOT }] } });
    expect(batch.statusCode).toBe(503);
    // an outcome is not recorded either, and the answer says so, with the password masked
    const outcome = await app.inject({ method: 'POST', url: '/v1/outcomes', payload: { items: [{ request_id: ok.json().request_id, label: ok.json().label }] } });
    expect(outcome.statusCode).toBe(503);
    expect(outcome.json()).toMatchObject({ status: 503, type: expect.stringMatching(/outcomes-unavailable$/) });
    expect(JSON.stringify(outcome.json())).not.toContain(server.password);
    await until(async () => (await app!.inject({ url: '/readyz' })).statusCode === 503, 10_000);
    const ready = (await app.inject({ url: '/readyz' })).json();
    expect(ready).toMatchObject({ status: 'not ready', database: 'not writable' });
    expect(JSON.stringify(ready)).not.toContain(server.password);

    server.start();
    await until(async () => (await score(app!)).statusCode === 200, 30_000);
    await until(async () => (await app!.inject({ url: '/readyz' })).statusCode === 200, 10_000);
    const after = await score(app);
    expect(after.statusCode).toBe(200);
    // every 200 is in the log, on one chain; the 503s are not
    const ids = (await sql<{ request_id: string }>(server.url, 'SELECT request_id FROM scored_requests')).map((r) => r.request_id);
    expect(ids).toContain(ok.json().request_id);
    expect(ids).toContain(after.json().request_id);
    expect(await runtime.store.verifyChain()).toMatchObject({ intact: true, rows: ids.length });
    // and outcomes are recorded again
    const outcome2 = await app.inject({ method: 'POST', url: '/v1/outcomes', payload: { items: [{ request_id: ok.json().request_id, label: ok.json().label }] } });
    expect(outcome2.json()).toMatchObject({ recorded: 1 });
    expect(await runtime.store.outcomes.verifyChain()).toMatchObject({ intact: true, rows: 1 });
  }, 120_000);
});
