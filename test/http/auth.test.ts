import BetterSqlite3 from 'better-sqlite3';
import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import { generateKey } from '../../src/auth/keys.js';
import { uuidv7 } from '../../src/ids.js';
import type { Role } from '../../src/store/keys-store.js';
import { SETOSA, type TestService, startTestService } from '../helpers/service.js';

/** Puts a key straight into the service's database and returns it, as `keys create` would print it. */
function addKey(svc: TestService, role: Role, label: string): { id: string; key: string } {
  const { key, hash, prefix } = generateKey();
  const id = uuidv7();
  svc.store.keys.create({ id, prefix, hash, role, label, createdAt: Date.now() });
  return { id, key };
}

const bearer = (key: string) => ({ authorization: `Bearer ${key}` });
const scoreBody = { features: SETOSA };

describe('API keys and roles', () => {
  let svc: TestService;
  const keys: Record<Role, { id: string; key: string }> = {} as never;
  beforeAll(async () => {
    svc = await startTestService();
    // keys exist before the first request, so the service sees them at once
    keys.scorer = addKey(svc, 'scorer', 'line-3 app');
    keys.reader = addKey(svc, 'reader', 'quality engineer');
    keys.admin = addKey(svc, 'admin', 'ops');
  });
  afterAll(async () => {
    await svc.close();
  });

  // Every route, and the status each role gets (401 without a key).
  const routes: Array<{ method: 'GET' | 'POST'; url: string; payload?: Record<string, unknown>; ok: number; needs: Role | 'public' }> = [
    { method: 'POST', url: '/v1/models/iris/score', payload: scoreBody, ok: 200, needs: 'scorer' },
    { method: 'POST', url: '/v1/models/iris/score-batch', payload: { items: [scoreBody] }, ok: 200, needs: 'scorer' },
    { method: 'GET', url: '/v1/models', ok: 200, needs: 'reader' },
    { method: 'GET', url: '/v1/models/iris', ok: 200, needs: 'reader' },
    { method: 'GET', url: '/v1/requests', ok: 200, needs: 'reader' },
    { method: 'GET', url: '/v1/models/iris/outcomes-report', ok: 200, needs: 'reader' },
    { method: 'GET', url: '/v1/models/iris/outcomes-report.html', ok: 200, needs: 'reader' },
    { method: 'POST', url: '/v1/models/iris/compare', payload: { format: 'plumbline-bundle/2' }, ok: 422, needs: 'admin' },
    { method: 'POST', url: '/v1/outcomes', payload: { items: [{ request_id: 'nope', label: 'setosa' }] }, ok: 200, needs: 'scorer' },
    { method: 'GET', url: '/v1/requests/nope/explanation', ok: 404, needs: 'reader' },
    { method: 'GET', url: '/v1/drift-reports', ok: 200, needs: 'reader' },
    { method: 'GET', url: '/v1/drift-reports/nope', ok: 404, needs: 'reader' },
    { method: 'GET', url: '/v1/alerts', ok: 200, needs: 'reader' },
    { method: 'GET', url: '/metrics', ok: 200, needs: 'reader' },
    { method: 'POST', url: '/v1/drift-reports', payload: { model: 'iris', from: '2026-11-30T00:00:00Z', to: '2026-12-01T00:00:00Z' }, ok: 201, needs: 'admin' },
    { method: 'POST', url: '/v1/models/reload', ok: 200, needs: 'admin' },
    { method: 'GET', url: '/healthz', ok: 200, needs: 'public' },
    { method: 'GET', url: '/readyz', ok: 200, needs: 'public' },
    { method: 'GET', url: '/openapi.json', ok: 200, needs: 'public' },
    { method: 'GET', url: '/api.html', ok: 200, needs: 'public' },
  ];
  const expected = (needs: Role | 'public', role: Role | null, ok: number): number => {
    if (needs === 'public') return ok;
    if (role === null) return 401;
    return role === 'admin' || role === needs ? ok : 403;
  };

  for (const r of routes) {
    it(`${r.method} ${r.url}: ${r.needs === 'public' ? 'open to all' : r.needs === 'admin' ? 'an admin key' : `a ${r.needs} key or an admin key`}`, async () => {
      for (const role of [null, 'scorer', 'reader', 'admin'] as const) {
        const res = await svc.app.inject({ method: r.method, url: r.url, ...(r.payload !== undefined ? { payload: r.payload } : {}), headers: role ? bearer(keys[role].key) : {} });
        expect(res.statusCode, `${role ?? 'no key'}: ${res.body.slice(0, 200)}`).toBe(expected(r.needs, role, r.ok));
        if (res.statusCode === 401 || res.statusCode === 403) {
          expect(res.headers['content-type']).toMatch(/^application\/problem\+json/);
          expect(res.json().type).toBe(`urn:plumbline:problem:${res.statusCode === 401 ? 'unauthorized' : 'forbidden'}`);
          expect(res.json().errors).toEqual([{ header: 'authorization', detail: expect.any(String) }]);
        }
      }
    });
  }

  it('says what is wrong with the Authorization header, with a Bearer challenge (RFC 6750)', async () => {
    const none = await svc.app.inject({ method: 'POST', url: '/v1/models/iris/score', payload: scoreBody });
    expect(none.headers['www-authenticate']).toBe('Bearer realm="plumbline"');
    expect(none.json().errors[0].detail).toBe('is missing');
    const basic = await svc.app.inject({ method: 'POST', url: '/v1/models/iris/score', payload: scoreBody, headers: { authorization: 'Basic dXNlcjpwYXNz' } });
    expect(basic.statusCode).toBe(401);
    expect(basic.json().detail).toBe('the Authorization header must be "Bearer <key>"');
    const forged = await svc.app.inject({ method: 'POST', url: '/v1/models/iris/score', payload: scoreBody, headers: bearer(generateKey().key) });
    expect(forged.statusCode).toBe(401);
    expect(forged.headers['www-authenticate']).toBe('Bearer realm="plumbline", error="invalid_token"');
    // same prefix, different rest: found by prefix, refused by the hash
    const sameprefix = `${keys.scorer.key.slice(0, 10)}${'A'.repeat(keys.scorer.key.length - 10)}`;
    expect((await svc.app.inject({ method: 'POST', url: '/v1/models/iris/score', payload: scoreBody, headers: bearer(sameprefix) })).statusCode).toBe(401);
    const forbidden = await svc.app.inject({ url: '/v1/requests', headers: bearer(keys.scorer.key) });
    expect(forbidden.json().detail).toBe('a scorer key may score; this needs a reader or admin key');
    const adminOnly = await svc.app.inject({ method: 'POST', url: '/v1/models/reload', headers: bearer(keys.reader.key) });
    expect(adminOnly.json().detail).toBe('a reader key may read models, the audit log, reports, alerts and metrics; this needs an admin key');
  });

  it('refuses before reading the body: garbage without a key is a 401, not a 400', async () => {
    const res = await svc.app.inject({ method: 'POST', url: '/v1/models/iris/score', payload: '{not json', headers: { 'content-type': 'application/json' } });
    expect(res.statusCode).toBe(401);
  });

  it('treats a path no route has as needing a key', async () => {
    expect((await svc.app.inject('/v1/nothing-here')).statusCode).toBe(401);
    expect((await svc.app.inject({ url: '/v1/nothing-here', headers: bearer(keys.reader.key) })).statusCode).toBe(404);
  });

  it("stores the key's label with every row it scores, and when the key was last used", async () => {
    const res = await svc.app.inject({ method: 'POST', url: '/v1/models/iris/score', payload: { ...scoreBody, tags: { part: 'K-1' } }, headers: bearer(keys.scorer.key) });
    const rows = svc.rows('SELECT request_id, key_label FROM scored_requests ORDER BY seq DESC LIMIT 1');
    expect(rows).toEqual([{ request_id: res.json().request_id, key_label: 'line-3 app' }]);
    const logged = (await svc.app.inject({ url: '/v1/requests?limit=1', headers: bearer(keys.reader.key) })).json();
    expect(logged.items[0]).toMatchObject({ request_id: res.json().request_id, key_label: 'line-3 app' });
    const listed = svc.store.keys.list().find((k) => k.id === keys.scorer.id)!;
    expect(listed.last_used_at).toBeGreaterThan(Date.now() - 60_000);
    expect(JSON.stringify(svc.store.keys.list())).not.toContain(keys.scorer.key.slice(10));
  });

  it('locks, not opens, the service when the last key is revoked', async () => {
    const svc2 = await startTestService();
    try {
      const only = addKey(svc2, 'admin', 'ops');
      expect((await svc2.app.inject({ url: '/v1/models', headers: bearer(only.key) })).statusCode).toBe(200);
      svc2.store.keys.revoke(only.id, Date.now());
      expect((await svc2.app.inject({ url: '/v1/models', headers: bearer(only.key) })).statusCode).toBe(401);
      // past the 1 s during which the service may still think keys are in use
      await new Promise((r) => setTimeout(r, 1100));
      expect((await svc2.app.inject('/v1/models')).statusCode).toBe(401);
    } finally {
      await svc2.close();
    }
  });

  it('stops a revoked key at once', async () => {
    const k = addKey(svc, 'scorer', 'old tablet');
    expect((await svc.app.inject({ method: 'POST', url: '/v1/models/iris/score', payload: scoreBody, headers: bearer(k.key) })).statusCode).toBe(200);
    svc.store.keys.revoke(k.id, Date.now());
    expect((await svc.app.inject({ method: 'POST', url: '/v1/models/iris/score', payload: scoreBody, headers: bearer(k.key) })).statusCode).toBe(401);
  });

  it('stores only a SHA-256 of each key, never the key', () => {
    const stored = svc.rows('SELECT prefix, hash FROM api_keys');
    for (const { key } of Object.values(keys)) {
      expect(JSON.stringify(stored)).not.toContain(key);
      expect(stored.some((s) => s.prefix === key.slice(0, 10))).toBe(true);
    }
  });
});

describe('serving without keys', () => {
  it('asks for none while no key exists, and logs no key label', async () => {
    const svc = await startTestService();
    try {
      expect((await svc.app.inject({ method: 'POST', url: '/v1/models/iris/score', payload: scoreBody })).statusCode).toBe(200);
      expect(svc.rows('SELECT key_label FROM scored_requests')).toEqual([{ key_label: null }]);
    } finally {
      await svc.close();
    }
  });

  it('asks for none with auth "off", even when keys exist', async () => {
    const svc = await startTestService({ config: { auth: 'off' } });
    try {
      addKey(svc, 'admin', 'ops');
      expect((await svc.app.inject({ method: 'POST', url: '/v1/models/iris/score', payload: scoreBody })).statusCode).toBe(200);
      expect((await svc.app.inject('/v1/requests')).statusCode).toBe(200);
    } finally {
      await svc.close();
    }
  });

  it('serves /metrics without a key when metrics.public is set', async () => {
    const svc = await startTestService({ config: { metrics: { public: true } } });
    try {
      addKey(svc, 'admin', 'ops');
      expect((await svc.app.inject('/metrics')).statusCode).toBe(200);
      expect((await svc.app.inject('/v1/requests')).statusCode).toBe(401);
    } finally {
      await svc.close();
    }
  });
});

describe('rate limit, security headers, load shedding', () => {
  let svc: TestService | null = null;
  afterEach(async () => {
    await svc?.close();
    svc = null;
  });

  it('limits requests per key per minute with a 429 problem and Retry-After; each key has its own budget', async () => {
    svc = await startTestService({ config: { limits: { requests_per_minute: 3 } } });
    const a = addKey(svc, 'scorer', 'a');
    const b = addKey(svc, 'scorer', 'b');
    const send = (k: string) => svc!.app.inject({ method: 'POST', url: '/v1/models/iris/score', payload: scoreBody, headers: bearer(k) });
    const statuses = [];
    for (let i = 0; i < 4; i++) statuses.push((await send(a.key)).statusCode);
    expect(statuses).toEqual([200, 200, 200, 429]);
    const limited = await send(a.key);
    expect(limited.headers['content-type']).toMatch(/^application\/problem\+json/);
    expect(limited.json()).toMatchObject({ type: 'urn:plumbline:problem:rate-limited', status: 429 });
    expect(Number(limited.headers['retry-after'])).toBeGreaterThan(0);
    expect(Number(limited.headers['retry-after'])).toBeLessThanOrEqual(60);
    expect((await send(b.key)).statusCode).toBe(200);
    // liveness and readiness are never limited
    for (let i = 0; i < 5; i++) expect((await svc.app.inject('/healthz')).statusCode).toBe(200);
    // refused requests scored nothing: 3 from a, 1 from b
    expect(svc.rows('SELECT key_label FROM scored_requests').map((r) => r.key_label)).toEqual(['a', 'a', 'a', 'b']);
  });

  it('sends security headers on every answer, and a content security policy on HTML pages', async () => {
    svc = await startTestService();
    for (const url of ['/v1/models', '/healthz', '/v1/nothing', '/api.html']) {
      const res = await svc.app.inject(url);
      expect(res.headers).toMatchObject({ 'x-content-type-options': 'nosniff', 'referrer-policy': 'no-referrer', 'x-frame-options': 'DENY', 'cache-control': 'no-store' });
    }
    const page = await svc.app.inject('/api.html');
    expect(page.headers['content-security-policy']).toContain("default-src 'none'");
    expect(page.headers['content-security-policy']).toContain("frame-ancestors 'none'");
    expect((await svc.app.inject('/v1/models')).headers['content-security-policy']).toBeUndefined();
  });

  it('answers 503 overloaded while the event loop lags, and keeps health open', { timeout: 15_000 }, async () => {
    svc = await startTestService({ config: { limits: { event_loop_delay_ms: 30 } } });
    expect((await svc.app.inject('/v1/models')).statusCode).toBe(200);
    // keep the event loop busy 80 ms of every ~85, as a flood of heavy work would
    const busy = setInterval(() => {
      const until = Date.now() + 80;
      while (Date.now() < until);
    }, 5);
    // the probe samples every second: two samples' worth
    await new Promise((resolve) => setTimeout(resolve, 2100));
    const shed = await svc.app.inject('/v1/models');
    const health = await svc.app.inject('/healthz');
    clearInterval(busy);
    expect(shed.statusCode).toBe(503);
    expect(shed.json().type).toBe('urn:plumbline:problem:overloaded');
    expect(shed.headers['retry-after']).toBe('1');
    expect(health.statusCode).toBe(200);
    // and recovers once the loop is idle again
    await new Promise((resolve) => setTimeout(resolve, 2100));
    expect((await svc.app.inject('/v1/models')).statusCode).toBe(200);
  });
});

describe('when the audit log cannot be written', () => {
  const breakLog = (svc: TestService): void => {
    const writable = new BetterSqlite3(svc.dbFile);
    writable.exec("CREATE TRIGGER refuse BEFORE INSERT ON scored_requests BEGIN SELECT RAISE(ABORT, 'disk full'); END");
    writable.close();
  };

  it('fails closed by default: 503, and no answer leaves without its audit row', async () => {
    const svc = await startTestService();
    try {
      breakLog(svc);
      const res = await svc.app.inject({ method: 'POST', url: '/v1/models/iris/score', payload: scoreBody });
      expect(res.statusCode).toBe(503);
      expect(res.json().type).toBe('urn:plumbline:problem:log-unavailable');
    } finally {
      await svc.close();
    }
  });

  it('with log.on_error "serve", answers, says so in a header, and counts what was not logged', async () => {
    const svc = await startTestService({ config: { log: { on_error: 'serve' } } });
    try {
      breakLog(svc);
      const res = await svc.app.inject({ method: 'POST', url: '/v1/models/iris/score-batch', payload: { items: [scoreBody, scoreBody] } });
      expect(res.statusCode).toBe(200);
      expect(res.json().items).toHaveLength(2);
      expect(res.headers['plumbline-audit']).toBe('not-logged');
      expect(svc.rows()).toHaveLength(0);
      const metrics = (await svc.app.inject('/metrics')).body;
      expect(metrics).toMatch(/^plumbline_unlogged_answers_total\{model="iris"\} 2$/m);
    } finally {
      await svc.close();
    }
  });
});

describe('API keys when the database cannot be written', () => {
  // The key check writes last_used_at on a key's first request of each minute: bookkeeping,
  // which must never fail the request (issue 19). Scoring still needs its rows committed.
  it('answers a read with 200 and a score with 503 log-unavailable while another process holds the write lock', async () => {
    const svc = await startTestService();
    const reader = addKey(svc, 'reader', 'quality engineer');
    const scorer = addKey(svc, 'scorer', 'line-3 app');
    const other = new BetterSqlite3(svc.dbFile);
    try {
      other.exec('BEGIN IMMEDIATE');
      // first request of each key, so each tries to write last_used_at
      const read = await svc.app.inject({ url: '/v1/models', headers: bearer(reader.key) });
      expect(read.statusCode, read.body).toBe(200);
      expect(read.json().items[0].name).toBe('iris');
      const scored = await svc.app.inject({ method: 'POST', url: '/v1/models/iris/score', payload: scoreBody, headers: bearer(scorer.key) });
      expect(scored.statusCode, scored.body).toBe(503);
      expect(scored.json().type).toBe('urn:plumbline:problem:log-unavailable');
      other.exec('ROLLBACK');
      // the bookkeeping write is not retried within the minute; the answer still goes out
      expect((await svc.app.inject({ method: 'POST', url: '/v1/models/iris/score', payload: scoreBody, headers: bearer(scorer.key) })).statusCode).toBe(200);
      expect(svc.store.keys.list().find((k) => k.id === reader.id)?.last_used_at).toBeNull();
    } finally {
      other.close();
      await svc.close();
    }
  });
});
