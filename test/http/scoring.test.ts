import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { fromFloat64Blob } from '../../src/store/float64-blob.js';
import { UUID_V7 } from '../../src/ids.js';
import { DETECTORS } from '../../src/core/domain/detectors.js';
import { scoreResponseSchema } from '../../src/contracts/score.js';
import { scoreBatchResponseSchema } from '../../src/http/routes/scoring.js';
import { SETOSA, type TestService, VIRGINICA, iris, startTestService } from '../helpers/service.js';

let svc: TestService;
beforeEach(async () => {
  svc = await startTestService();
});
afterEach(async () => {
  await svc.close();
});

const score = (body: unknown, name = 'iris') => svc.app.inject({ method: 'POST', url: `/v1/models/${name}/score`, payload: body as object });

describe('POST /v1/models/{name}/score', () => {
  it('answers with the response shape and commits one audit row holding exactly what was answered', async () => {
    const res = await score({ features: SETOSA, tags: { line: '3', station: 'S2' } });
    expect(res.statusCode).toBe(200);
    const body = res.json();
    // The answer leaves through JSON.stringify, not a zod encode: it must be exactly its schema,
    // with no field missing, mistyped or extra (parse strips unknown keys at every level).
    expect(scoreResponseSchema.parse(body)).toEqual(body);
    expect(body.request_id).toMatch(UUID_V7);
    expect(body.model).toEqual({ name: 'iris', version: '1', sha256: iris().sha256 });
    expect(body.label).toBe('setosa');
    expect(Object.values(body.probabilities as Record<string, number>).reduce((a, b) => a + b, 0)).toBeCloseTo(1, 14);
    expect(body.domain.in_domain).toBe(true);
    expect(body.domain.outside).toEqual([]);
    // every detector that votes in the bundle, in answer order, each passed
    const voting = DETECTORS.filter((d) => d === 'envelope' || iris().domain[d] !== undefined);
    expect(voting.length).toBeGreaterThanOrEqual(3);
    expect(body.domain.checks.map((c: { detector: string; passed: boolean }) => [c.detector, c.passed])).toEqual(voting.map((d) => [d, true]));

    const rows = svc.rows();
    expect(rows).toHaveLength(1);
    const row = rows[0]!;
    expect(row.request_id).toBe(body.request_id);
    expect(row.batch_id).toBeNull();
    expect(row.model_sha256).toBe(iris().sha256);
    expect(Array.from(fromFloat64Blob(row.features as Buffer))).toEqual([5.1, 3.5, 1.4, 0.2]);
    expect(Array.from(fromFloat64Blob(row.probabilities as Buffer))).toEqual(iris().classes.map((c) => body.probabilities[c]));
    expect(JSON.parse(row.tags as string)).toEqual({ line: '3', station: 'S2' });
    expect(row.label).toBe('setosa');
    expect(row.margin).toBe(body.margin);
    expect(row.in_domain).toBe(1);
    expect(row.review).toBe(body.review ? 1 : 0);
    expect(JSON.parse(row.domain as string)).toEqual({ checks: body.domain.checks, outside: [] });
    expect(row.latency_us).toBeGreaterThanOrEqual(0);
  });

  it('takes the features as an array in the bundle order, and gives the same answer', async () => {
    const named = (await score({ features: VIRGINICA })).json();
    const ordered = (await score({ features: [6.7, 3.0, 5.2, 2.3] })).json();
    expect(ordered.probabilities).toEqual(named.probabilities);
    expect(svc.rows()).toHaveLength(2);
  });

  it('names the features outside the envelope, with units, and marks the answer for review', async () => {
    const res = await score({ features: { ...SETOSA, petal_length: 40 } });
    const body = res.json();
    expect(body.domain.in_domain).toBe(false);
    expect(body.review).toBe(true);
    expect(body.domain.outside).toEqual([expect.objectContaining({ feature: 'petal_length', value: 40, unit: 'cm' })]);
    expect(svc.rows()[0]!.in_domain).toBe(0);
  });

  it('lists at most 50 field errors and says how many there were', async () => {
    const junk = Object.fromEntries(Array.from({ length: 120 }, (_, i) => [`k${i}`, i]));
    const res = await score({ features: { ...SETOSA, ...junk } });
    expect(res.statusCode).toBe(400);
    expect(res.json().errors).toHaveLength(50);
    expect(res.json().detail).toMatch(/120 problems, the first 50 listed/);
  });

  it('refuses missing and unknown features with problem+json naming each, and logs no answer', async () => {
    const { petal_width: _, ...three } = SETOSA;
    const res = await score({ features: { ...three, petal_wdth: 0.2 } });
    expect(res.statusCode).toBe(400);
    expect(res.headers['content-type']).toMatch(/^application\/problem\+json/);
    const p = res.json();
    expect(p.type).toBe('urn:plumbline:problem:invalid-request');
    expect(p.errors).toEqual([
      { pointer: '#/features/petal_width', detail: expect.stringMatching(/is missing/) },
      { pointer: '#/features/petal_wdth', detail: 'is not a feature of iris' },
    ]);
    expect(svc.rows()).toHaveLength(0);
  });

  it('refuses values that are not finite numbers, a wrong array length, bad tags and unknown fields, each by pointer', async () => {
    const cases: Array<[unknown, string]> = [
      [{ features: { ...SETOSA, sepal_length: 'wide' } }, '#/features/sepal_length'],
      [{ features: [5.1, 3.5, 1.4] }, '#/features'],
      [{ features: [5.1, 3.5, 1.4, null] }, '#/features/3'],
      [{ features: { ...SETOSA, sepal_length: 1e16 } }, '#/features/sepal_length'],
      [{ features: SETOSA, tags: { line: 3 } }, '#/tags/line'],
      [{ features: SETOSA, tags: { '': 'x' } }, '#/tags/'],
      [{ features: { ...SETOSA, 'flow_l/min': 1 } }, '#/features/flow_l~1min'],
      [{ features: SETOSA, extra: true }, '#/extra'],
      [{ feature: SETOSA }, '#/features'],
      [[1, 2, 3], '#'],
    ];
    for (const [body, at] of cases) {
      const res = await score(body);
      expect(res.statusCode, JSON.stringify(body)).toBe(400);
      expect(res.json().errors.map((e: { pointer: string }) => e.pointer), JSON.stringify(body)).toContain(at);
    }
    expect(svc.rows()).toHaveLength(0);
  });

  it('refuses an unknown model with 404 naming the loaded ones', async () => {
    const res = await score({ features: SETOSA }, 'lathe-vibration');
    expect(res.statusCode).toBe(404);
    expect(res.json()).toMatchObject({ type: 'urn:plumbline:problem:unknown-model', detail: expect.stringMatching(/loaded: iris/) });
  });

  it('refuses JSON that does not parse, another content type, and a body over the limit', async () => {
    const broken = await svc.app.inject({ method: 'POST', url: '/v1/models/iris/score', headers: { 'content-type': 'application/json' }, payload: '{"features": [1,' });
    expect(broken.statusCode).toBe(400);
    expect(broken.json().type).toBe('urn:plumbline:problem:invalid-json');
    expect(broken.json().detail).toMatch(/^the body is not valid JSON: .+/);
    const blank = await svc.app.inject({ method: 'POST', url: '/v1/models/iris/score', headers: { 'content-type': 'application/json' }, payload: '' });
    expect(blank.json()).toMatchObject({ status: 400, detail: 'the body is empty but the content-type says application/json' });
    const text = await svc.app.inject({ method: 'POST', url: '/v1/models/iris/score', headers: { 'content-type': 'text/csv' }, payload: '1,2,3,4' });
    expect(text.statusCode).toBe(415);
    expect(text.json().type).toBe('urn:plumbline:problem:unsupported-media-type');
    const big = await svc.app.inject({ method: 'POST', url: '/v1/models/iris/score', headers: { 'content-type': 'application/json' }, payload: `{"features": [${'1,'.repeat(600_000)}1]}` });
    expect(big.statusCode).toBe(413);
    expect(big.json()).toMatchObject({ type: 'urn:plumbline:problem:body-too-large', detail: 'the body is larger than 1048576 bytes (limits.body_bytes)' });
    const utf16 = await svc.app.inject({ method: 'POST', url: '/v1/models/iris/score', headers: { 'content-type': 'application/json; charset=utf-16' }, payload: '{"features": [1,2,3,4]}' });
    expect(utf16.statusCode).toBe(415);
    const proto = await svc.app.inject({ method: 'POST', url: '/v1/models/iris/score', headers: { 'content-type': 'application/json' }, payload: '{"features": [1,2,3,4], "__proto__": {"x": 1}}' });
    expect(proto.statusCode).toBe(400);
    expect(proto.json().detail).toMatch(/__proto__ or constructor\.prototype key, which is refused/);
    expect(svc.rows()).toHaveLength(0);
  });

  it('records each refused request, without its body, in rejected_requests', async () => {
    await score({ features: [1] });
    await svc.app.inject({ method: 'POST', url: '/v1/models/iris/score', headers: { 'content-type': 'text/plain' }, payload: 'garbage' });
    await svc.app.inject({ method: 'GET', url: '/v2/whatever' });
    svc.store.log.flush();
    const rejected = svc.rows('SELECT method, route, model_name, status, problem_type, body_bytes FROM rejected_requests ORDER BY seq');
    expect(rejected).toEqual([
      { method: 'POST', route: '/v1/models/iris/score', model_name: 'iris', status: 400, problem_type: 'invalid-request', body_bytes: 16 },
      { method: 'POST', route: '/v1/models/iris/score', model_name: 'iris', status: 415, problem_type: 'unsupported-media-type', body_bytes: 7 },
      { method: 'GET', route: '/v2/whatever', model_name: null, status: 404, problem_type: 'not-found', body_bytes: null },
    ]);
  });

  it('answers 503 and logs nothing when the audit log cannot be written', async () => {
    const writable = new (await import('better-sqlite3')).default(svc.dbFile);
    writable.exec("CREATE TRIGGER refuse BEFORE INSERT ON scored_requests BEGIN SELECT RAISE(ABORT, 'disk says no'); END");
    writable.close();
    const res = await score({ features: SETOSA });
    expect(res.statusCode).toBe(503);
    expect(res.json().type).toBe('urn:plumbline:problem:log-unavailable');
    expect(res.body).not.toMatch(/disk says no|stack|at /);
    expect(svc.rows()).toHaveLength(0);
  });
});

describe('POST /v1/models/{name}/score-batch', () => {
  it('answers every item in order, each with its own id, and commits them together with the batch id', async () => {
    const res = await svc.app.inject({ method: 'POST', url: '/v1/models/iris/score-batch', payload: { items: [{ features: SETOSA }, { features: VIRGINICA, tags: { part: 'A-17' } }] } });
    expect(res.statusCode).toBe(200);
    expect(scoreBatchResponseSchema.parse(res.json())).toEqual(res.json());
    const { batch_id, items } = res.json();
    expect(items.map((i: { label: string }) => i.label)).toEqual(['setosa', 'virginica']);
    expect(new Set(items.map((i: { request_id: string }) => i.request_id)).size).toBe(2);
    const rows = svc.rows();
    expect(rows.map((r) => r.request_id)).toEqual(items.map((i: { request_id: string }) => i.request_id));
    expect(rows.map((r) => r.batch_id)).toEqual([batch_id, batch_id]);
    expect(batch_id).toMatch(UUID_V7);
    expect(rows[1]!.tags).toBe('{"part":"A-17"}');
  });

  it('refuses the whole batch when one item is bad, naming its index, and scores and logs none of it', async () => {
    const res = await svc.app.inject({
      method: 'POST',
      url: '/v1/models/iris/score-batch',
      payload: { items: [{ features: SETOSA }, { features: SETOSA }, { features: [1, 2] }, { features: VIRGINICA }] },
    });
    expect(res.statusCode).toBe(400);
    expect(res.json().detail).toMatch(/first at item 2/);
    expect(res.json().errors).toEqual([{ pointer: '#/items/2/features', detail: expect.stringMatching(/holds 2 values; iris takes 4/) }]);
    expect(svc.rows()).toHaveLength(0);
  });

  it('refuses more items than limits.batch_items, and an empty batch', async () => {
    const over = await svc.app.inject({ method: 'POST', url: '/v1/models/iris/score-batch', payload: { items: new Array(1001).fill({ features: SETOSA }) } });
    expect(over.statusCode).toBe(400);
    expect(over.json().errors[0].pointer).toBe('#/items');
    const empty = await svc.app.inject({ method: 'POST', url: '/v1/models/iris/score-batch', payload: { items: [] } });
    expect(empty.statusCode).toBe(400);
    expect(svc.rows()).toHaveLength(0);
  });

  it('takes a configured batch limit', async () => {
    await svc.close();
    svc = await startTestService({ config: { limits: { batch_items: 2 } } });
    const res = await svc.app.inject({ method: 'POST', url: '/v1/models/iris/score-batch', payload: { items: [{ features: SETOSA }, { features: SETOSA }, { features: SETOSA }] } });
    expect(res.statusCode).toBe(400);
    expect(res.json().errors[0]).toEqual({ pointer: '#/items', detail: 'a batch holds at most 2 items (limits.batch_items)' });
    expect(res.json().detail).toBe('the body has 1 problem; nothing was scored');
  });
});
