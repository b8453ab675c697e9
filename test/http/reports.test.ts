import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { DAY_END, DAY_START, demoDayService } from '../helpers/demo.js';
import type { TestService } from '../helpers/service.js';

let svc: TestService;
beforeAll(async () => {
  svc = await demoDayService();
});
afterAll(async () => {
  await svc.close();
});

const day = { model: 'moulding-quality', from: new Date(DAY_START).toISOString(), to: new Date(DAY_END).toISOString() };

describe('drift report routes', () => {
  let id = '';

  it('POST /v1/drift-reports builds a report on a worker thread, stores it and answers 201', async () => {
    const res = await svc.app.inject({ method: 'POST', url: '/v1/drift-reports', payload: day });
    expect(res.statusCode).toBe(201);
    const r = res.json();
    id = r.id;
    expect(r.model.name).toBe('moulding-quality');
    expect(r.window).toEqual({ from: day.from, to: day.to });
    expect(r.verdict).toBe('shifted');
    expect(svc.rows('SELECT id, model_name, trigger, window_from, window_to FROM drift_reports')).toEqual([
      { id, model_name: 'moulding-quality', trigger: 'request', window_from: DAY_START, window_to: DAY_END },
    ]);
  });

  it('GET /v1/drift-reports/{id} returns the stored report', async () => {
    const res = await svc.app.inject(`/v1/drift-reports/${id}`);
    expect(res.statusCode).toBe(200);
    expect(res.json().id).toBe(id);
    expect(res.json().features).toHaveLength(10);
  });

  it('GET /v1/drift-reports/{id}.html renders it as a self-contained page', async () => {
    const res = await svc.app.inject(`/v1/drift-reports/${id}.html`);
    expect(res.statusCode).toBe(200);
    expect(res.headers['content-type']).toMatch(/^text\/html/);
    expect(res.body).toContain('data-verdict="shifted"');
    expect(res.body).not.toMatch(/<script|<link|src=|url\(/i);
  });

  it('GET /v1/drift-reports lists summaries newest first, filters by model and window, and pages', async () => {
    await svc.app.inject({ method: 'POST', url: '/v1/drift-reports', payload: { ...day, to: new Date(DAY_START + 6 * 3_600_000).toISOString() } });
    const all = (await svc.app.inject('/v1/drift-reports')).json();
    expect(all.items).toHaveLength(2);
    expect(all.items[1].id).toBe(id);
    expect(all.items[0]).toMatchObject({ trigger: 'request', verdict: expect.any(String), counts: { scored: 500 } });
    const first = (await svc.app.inject('/v1/drift-reports?limit=1')).json();
    expect(first.items).toHaveLength(1);
    const second = (await svc.app.inject(`/v1/drift-reports?limit=1&cursor=${first.next_cursor}`)).json();
    expect(second.items[0].id).toBe(id);
    expect(second.next_cursor).toBeNull();
    expect((await svc.app.inject('/v1/drift-reports?model=other')).json().items).toEqual([]);
    expect((await svc.app.inject(`/v1/drift-reports?from=${encodeURIComponent(new Date(DAY_END).toISOString())}`)).json().items).toEqual([]);
  });

  it('refuses an unknown report, an empty or too long window, and a model the log has never seen', async () => {
    expect((await svc.app.inject('/v1/drift-reports/nope')).json().type).toBe('urn:plumbline:problem:unknown-report');
    const empty = await svc.app.inject({ method: 'POST', url: '/v1/drift-reports', payload: { ...day, to: day.from } });
    expect(empty.statusCode).toBe(400);
    expect(empty.json().errors).toEqual([{ pointer: '#/to', detail: 'must be later than from' }]);
    const long = await svc.app.inject({ method: 'POST', url: '/v1/drift-reports', payload: { ...day, from: '2024-01-01T00:00:00Z' } });
    expect(long.statusCode).toBe(400);
    const unknown = await svc.app.inject({ method: 'POST', url: '/v1/drift-reports', payload: { ...day, model: 'press-9' } });
    expect(unknown.statusCode).toBe(404);
    expect(unknown.json()).toMatchObject({ type: 'urn:plumbline:problem:unlogged-model', errors: [{ pointer: '#/model' }] });
    expect(unknown.json().detail).toMatch(/press-9/);
    const bad = await svc.app.inject({ method: 'POST', url: '/v1/drift-reports', payload: { model: 'moulding-quality', from: 'yesterday', to: day.to } });
    expect(bad.statusCode).toBe(400);
    expect(bad.json().errors[0].pointer).toBe('#/from');
    // a refused body here is not a scoring request, so the detail does not speak of scoring
    expect(bad.json().detail).toBe('the body has 1 problem');
    const backwards = await svc.app.inject(`/v1/drift-reports?from=${encodeURIComponent(day.to)}&to=${encodeURIComponent(day.from)}`);
    expect(backwards.statusCode).toBe(400);
    expect(backwards.json().errors).toEqual([{ parameter: 'to', detail: 'must be later than from' }]);
  });

  it('keeps scoring while a report is being built', async () => {
    const report = svc.app.inject({ method: 'POST', url: '/v1/drift-reports', payload: day });
    const score = await svc.app.inject({ method: 'POST', url: '/v1/models/moulding-quality/score', payload: { features: [232.1, 53.8, 923, 478, 3.48, 14.18, 102, 5.4, 23.7, 47.93] } });
    expect(score.statusCode).toBe(200);
    expect((await report).statusCode).toBe(201);
  });
});
