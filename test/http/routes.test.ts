import { readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { SETOSA, type TestService, VIRGINICA, iris, startTestService } from '../helpers/service.js';
import { capturedLogger } from '../helpers/sink.js';

let svc: TestService;
beforeAll(async () => {
  svc = await startTestService();
});
afterAll(async () => {
  await svc.close();
});

describe('health', () => {
  it('GET /healthz answers while the process runs', async () => {
    const res = await svc.app.inject('/healthz');
    expect(res.statusCode).toBe(200);
    expect(res.json()).toEqual({ status: 'ok' });
  });

  it('GET /readyz is ready when a model is loaded and the database takes writes', async () => {
    const res = await svc.app.inject('/readyz');
    expect(res.statusCode).toBe(200);
    expect(res.json()).toEqual({ status: 'ready', models: 1, database: 'writable' });
  });

  it('GET /readyz answers 503 with no model loaded', async () => {
    const empty = await startTestService({ bundles: [] });
    try {
      const res = await empty.app.inject('/readyz');
      expect(res.statusCode).toBe(503);
      expect(res.json()).toEqual({ status: 'not ready', models: 0, database: 'writable' });
    } finally {
      await empty.close();
    }
  });
});

describe('models', () => {
  it('POST /v1/models/reload refuses a directory with a file that is not a bundle, naming it without quoting it', async () => {
    const other = await startTestService();
    try {
      writeFileSync(join(other.modelsDir, 'passwd.bundle.json'), 'root:x:0:0:root:/root:/bin/bash\n');
      const res = await other.app.inject({ method: 'POST', url: '/v1/models/reload' });
      expect(res.statusCode).toBe(422);
      expect(res.json()).toMatchObject({ type: 'urn:plumbline:problem:reload-refused', detail: expect.stringMatching(/passwd\.bundle\.json refused: is not JSON$/) });
      expect(res.body).not.toContain('root:');
      expect((await other.app.inject('/v1/models')).json().items.map((m: { name: string }) => m.name)).toEqual(['iris']);
    } finally {
      await other.close();
    }
  });

  it('GET /v1/models lists the loaded bundles with features, classes and load time', async () => {
    const res = await svc.app.inject('/v1/models');
    expect(res.statusCode).toBe(200);
    const [m] = res.json().items;
    expect(m).toMatchObject({ name: 'iris', version: '1', sha256: iris().sha256, classes: ['setosa', 'versicolor', 'virginica'] });
    expect(m.features[0]).toEqual({ name: 'sepal_length', unit: 'cm', description: 'sepal length of the flower' });
    expect(Date.parse(m.loaded_at)).not.toBeNaN();
  });

  it('GET /v1/models/{name} gives the manifest without weights', async () => {
    const res = await svc.app.inject('/v1/models/iris');
    expect(res.statusCode).toBe(200);
    const m = res.json();
    expect(m.format).toBe('plumbline-bundle/2');
    expect(m.members).toHaveLength(5);
    expect(m.members[0].layers.map((l: { outputs: number }) => l.outputs)).toEqual([32, 32, 3]);
    expect(res.body).not.toContain(iris().members[0]!.layers[0]!.weights.slice(0, 40));
    expect(m.domain.envelope.features[2]).toEqual({ name: 'petal_length', unit: 'cm', low: iris().domain.envelope.low[2], high: iris().domain.envelope.high[2] });
    expect(m.training.metrics.held_out.accuracy).toBe(iris().training.metrics.held_out?.accuracy);
    expect(m.training.members).toEqual(iris().training.members);
    expect(m.calibration.temperature).toBe(iris().calibration.temperature);
    expect(m.domain.held_out).toEqual(iris().domain.held_out);
    const d = iris().domain;
    expect(m.domain.detectors).toEqual([
      { detector: 'envelope', threshold: 0 },
      ...(['input_mahalanobis', 'feature_mahalanobis', 'energy', 'disagreement'] as const).flatMap((n) => (d[n] ? [{ detector: n, threshold: d[n].threshold }] : [])),
    ]);
    expect(m.domain.left_out).toEqual(d.left_out);
    expect(res.body).not.toContain(JSON.stringify(d.input_mahalanobis?.members[0]?.cholesky.slice(0, 3)).slice(1, -1));
  });

  it('GET /v1/models/{name} of an unknown model is a 404 problem', async () => {
    const res = await svc.app.inject('/v1/models/press-7');
    expect(res.statusCode).toBe(404);
    expect(res.headers['content-type']).toMatch(/^application\/problem\+json/);
    expect(res.json().type).toBe('urn:plumbline:problem:unknown-model');
  });
});

describe('failures inside the service', () => {
  it('answer 500 problem+json with no stack or internals, and log the error', async () => {
    const { logger, lines } = capturedLogger();
    const broken = await startTestService({ logger });
    broken.app.scoring.scoreOne = async () => {
      throw new TypeError('cannot read properties of undefined (reading "weights") at scorer.ts:42');
    };
    try {
      const res = await broken.app.inject({ method: 'POST', url: '/v1/models/iris/score', payload: { features: SETOSA } });
      expect(res.statusCode).toBe(500);
      expect(res.json()).toEqual({
        type: 'urn:plumbline:problem:internal',
        title: 'The service failed; the error is in its log',
        status: 500,
        detail: 'the service failed while answering; the error is in its log',
        instance: '/v1/models/iris/score',
      });
      expect(res.body).not.toMatch(/weights|scorer\.ts|TypeError/);
      expect(lines.some((l) => l.includes('"level":50') && l.includes('scorer.ts:42'))).toBe(true);
    } finally {
      await broken.close();
    }
  });

  it('never write feature values to the log at info level', async () => {
    const { logger, lines } = capturedLogger();
    const logged = await startTestService({ logger });
    try {
      const odd = { sepal_length: 5.123456789, sepal_width: 3.987654321, petal_length: 1.4242424242, petal_width: 0.2717171717 };
      await logged.app.inject({ method: 'POST', url: '/v1/models/iris/score', payload: { features: odd } });
      await logged.app.inject({ method: 'POST', url: '/v1/models/iris/score', payload: { features: { ...odd, extra: 9.87654321 } } });
      expect(lines.length).toBeGreaterThanOrEqual(2);
      expect(lines.some((l) => l.includes('"req_id"'))).toBe(true);
      for (const v of ['5.123456789', '3.987654321', '1.4242424242', '0.2717171717', '9.87654321']) expect(lines.join('\n')).not.toContain(v);
    } finally {
      await logged.close();
    }
  });
});

describe('unknown paths and methods', () => {
  it('answers 405 with Allow for a path that exists under another method', async () => {
    const res = await svc.app.inject({ method: 'DELETE', url: '/v1/models/iris' });
    expect(res.statusCode).toBe(405);
    expect(res.headers.allow).toBe('GET, HEAD');
    expect(res.json()).toMatchObject({ type: 'urn:plumbline:problem:method-not-allowed', status: 405 });
    const get = await svc.app.inject({ method: 'GET', url: '/v1/models/iris/score' });
    expect(get.statusCode).toBe(405);
    expect(get.headers.allow).toBe('POST');
  });

  it('answers 404, not 405, for a known path with a trailing slash', async () => {
    expect((await svc.app.inject('/healthz/')).statusCode).toBe(404);
    expect((await svc.app.inject({ method: 'POST', url: '/v1/models/iris/score/', payload: {} })).statusCode).toBe(404);
  });

  it('answers 404 problem+json elsewhere', async () => {
    const res = await svc.app.inject('/v1/nothing/here?x=1');
    expect(res.statusCode).toBe(404);
    expect(res.json()).toEqual({
      type: 'urn:plumbline:problem:not-found',
      title: 'There is nothing at this path',
      status: 404,
      detail: 'nothing is at /v1/nothing/here; GET /openapi.json lists every route',
      instance: '/v1/nothing/here',
    });
  });
});

describe('GET /v1/requests', () => {
  beforeAll(async () => {
    const post = (features: object, tags?: object) => svc.app.inject({ method: 'POST', url: '/v1/models/iris/score', payload: { features, ...(tags ? { tags } : {}) } });
    await post(SETOSA, { line: '1' });
    await post(VIRGINICA, { line: '2' });
    await post({ ...SETOSA, petal_length: 40 }, { line: '1', station: 'S9' });
    await post(VIRGINICA);
  });

  it('lists the audit log newest first, with features and probabilities by name', async () => {
    const res = await svc.app.inject('/v1/requests');
    expect(res.statusCode).toBe(200);
    const { items, next_cursor } = res.json();
    expect(items).toHaveLength(4);
    expect(next_cursor).toBeNull();
    expect(items[3].features).toEqual(SETOSA);
    expect(items[3].tags).toEqual({ line: '1' });
    expect(items[0].tags).toEqual({});
    expect(Object.keys(items[0].probabilities)).toEqual(['setosa', 'versicolor', 'virginica']);
    expect(items[1].in_domain).toBe(false);
    expect(items[1].domain.outside[0].feature).toBe('petal_length');
  });

  it('filters by in_domain, label, tag and model', async () => {
    const q = async (query: string) => (await svc.app.inject(`/v1/requests?${query}`)).json().items as Array<{ label: string; tags: Record<string, string> }>;
    expect(await q('in_domain=false')).toHaveLength(1);
    // the setosa pushed to petal_length 40 cm is answered virginica: far from the data, ReLU extrapolates
    expect(await q('label=setosa')).toHaveLength(1);
    expect((await q('label=virginica')).map((i) => i.label)).toEqual(['virginica', 'virginica', 'virginica']);
    expect(await q('tag=line:1')).toHaveLength(2);
    expect(await q('tag=line:1&tag=station:S9')).toHaveLength(1);
    expect(await q('model=other')).toHaveLength(0);
  });

  it('filters by time: from inclusive, to exclusive', async () => {
    const all = (await svc.app.inject('/v1/requests')).json().items as Array<{ received_at: string }>;
    const oldest = all[3]!.received_at;
    expect((await svc.app.inject(`/v1/requests?to=${encodeURIComponent(oldest)}`)).json().items).toHaveLength(0);
    expect((await svc.app.inject(`/v1/requests?from=${encodeURIComponent(oldest)}`)).json().items).toHaveLength(4);
    expect((await svc.app.inject('/v1/requests?from=2099-01-01T00:00:00Z')).json().items).toHaveLength(0);
  });

  it('pages with an opaque cursor until next_cursor is null', async () => {
    const seen: string[] = [];
    let url = '/v1/requests?limit=3';
    for (;;) {
      const page = (await svc.app.inject(url)).json();
      seen.push(...page.items.map((i: { request_id: string }) => i.request_id));
      if (!page.next_cursor) break;
      url = `/v1/requests?limit=3&cursor=${page.next_cursor}`;
    }
    expect(seen).toHaveLength(4);
    expect(new Set(seen).size).toBe(4);
    expect([...seen].sort().reverse()).toEqual(seen);
  });

  it('refuses a bad limit, cursor, time, tag or unknown parameter, naming the parameter', async () => {
    const cases: Array<[string, string]> = [
      ['limit=0', 'limit'],
      ['limit=1001', 'limit'],
      ['cursor=abc', 'cursor'],
      ['from=yesterday', 'from'],
      ['tag=nocolon', 'tag'],
      ['from=2026-02-01T00:00:00Z&to=2026-01-01T00:00:00Z', 'to'],
      ['colour=red', 'colour'],
    ];
    for (const [query, parameter] of cases) {
      const res = await svc.app.inject(`/v1/requests?${query}`);
      expect(res.statusCode, query).toBe(400);
      expect(res.json().errors.map((e: { parameter: string }) => e.parameter), query).toContain(parameter);
    }
  });
});

describe('OpenAPI and docs', () => {
  it('GET /openapi.json serves the document the repository holds (npm run openapi)', async () => {
    const res = await svc.app.inject('/openapi.json');
    expect(res.statusCode).toBe(200);
    const committed = JSON.parse(readFileSync(new URL('../../openapi/openapi.json', import.meta.url), 'utf8'));
    expect(res.json()).toEqual(committed);
  });

  it('GET /api.html is a self-contained page listing every route; the old /docs path is not served', async () => {
    expect((await svc.app.inject('/docs')).statusCode).toBe(404);
    const res = await svc.app.inject('/api.html');
    expect(res.statusCode).toBe(200);
    expect(res.headers['content-type']).toMatch(/^text\/html/);
    for (const route of ['/v1/models/{name}/score', '/v1/models/{name}/score-batch', '/v1/requests', '/readyz']) expect(res.body).toContain(route);
    expect(res.body).not.toMatch(/<script|https?:\/\/(?!127)/);
  });
});
