import { parse } from 'parse5';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { outcomesReportSchema } from '../../src/contracts/outcomes-report.js';
import type { OutcomesReport } from '../../src/contracts/outcomes-report.js';
import { recordDemoOutcomes } from '../../src/demo/outcomes.js';
import { replayDemoDay } from '../../src/demo/replay.js';
import { renderOutcomesHtml } from '../../src/reports/outcomes-html.js';
import { readFileSync } from 'node:fs';
import { sealBundle } from '../../src/bundle/verify.js';
import { compareReportSchema } from '../../src/contracts/compare-report.js';
import { DAY_END, DAY_START, DEMO_DIR, demoBundle } from '../helpers/demo.js';
import { type TestService, startTestService } from '../helpers/service.js';

const WINDOW = `from=${new Date(DAY_START).toISOString()}&to=${new Date(DAY_END).toISOString()}`;

let svc: TestService;
let report: OutcomesReport;
beforeAll(async () => {
  svc = await startTestService({ bundles: [demoBundle()] });
  const day = await replayDemoDay(svc.app.scoring, 'moulding-quality', DEMO_DIR, DAY_START);
  expect(await recordDemoOutcomes(svc.store.outcomes, 'moulding-quality', day.shots)).toEqual({ sent: 666, recorded: 666, refused: 0 });
  const res = await svc.app.inject(`/v1/models/moulding-quality/outcomes-report?${WINDOW}`);
  expect(res.statusCode).toBe(200);
  report = res.json();
}, 60_000);
afterAll(async () => {
  await svc.close();
});

describe('GET /v1/models/{name}/outcomes-report on the demo day', () => {
  it('answers the report schema, counting the answers and outcomes the database holds', () => {
    expect(outcomesReportSchema.safeParse(report).error).toBeUndefined();
    // counted here with SQL of the test's own, not the store's
    const [counts] = svc.rows(
      `SELECT COUNT(*) AS scored, SUM(EXISTS (SELECT 1 FROM outcomes o WHERE o.request_id = s.request_id)) AS labelled,
              SUM((SELECT label FROM outcomes o WHERE o.request_id = s.request_id) = s.label) AS right
       FROM scored_requests s`,
    ) as Array<{ scored: number; labelled: number; right: number }>;
    expect([report.scored, report.labelled]).toEqual([counts?.scored, counts?.labelled]);
    expect(report.accuracy.value).toBeCloseTo((counts?.right ?? 0) / (counts?.labelled ?? 1), 14);
    expect(report.confusion.counts.flat().reduce((a, b) => a + b, 0)).toBe(report.labelled);
    expect(report.by_domain.in_domain.rows + report.by_domain.out_of_domain.rows).toBe(report.labelled);
    expect(report.by_margin.reduce((s, b) => s + b.rows, 0)).toBe(report.labelled);
  });

  it('shows in-domain answers right far more often than out-of-domain ones, as the invented day is built to', () => {
    const d = report.by_domain;
    expect(d.out_of_domain.rows).toBeGreaterThan(20);
    expect((d.in_domain.accuracy as number) - (d.out_of_domain.accuracy as number)).toBeGreaterThan(0.15);
    expect(d.p_value).toBeLessThan(0.001);
    expect(report.findings[0]).toMatch(/^Out-of-domain answers were right far less often: /);
  });

  it('answers the same report as a page with format=html and at the .html route, without an HTML parse error', async () => {
    const a = await svc.app.inject(`/v1/models/moulding-quality/outcomes-report?${WINDOW}&format=html`);
    const b = await svc.app.inject(`/v1/models/moulding-quality/outcomes-report.html?${WINDOW}`);
    expect(a.headers['content-type']).toBe('text/html; charset=utf-8');
    expect(b.headers['content-type']).toBe('text/html; charset=utf-8');
    const strip = (html: string) => html.replace(/made [^ ]+ ·/, '');
    expect(strip(a.body)).toBe(strip(b.body));
    for (const chart of ['confusion', 'reliability', 'margin']) expect(a.body).toContain(`data-chart="${chart}"`);
    const errors: string[] = [];
    parse(renderOutcomesHtml({ ...report, model: { ...report.model, name: 'a<b & "c"' }, findings: ['p < 1e-15 & more'] }), { onParseError: (e) => errors.push(e.code) });
    expect(errors).toEqual([]);
  });

  it('refuses an empty or too long window and a model the log never held', async () => {
    const empty = await svc.app.inject('/v1/models/moulding-quality/outcomes-report?from=2026-11-30T00:00:00Z&to=2026-11-30T00:00:00Z');
    expect(empty.statusCode).toBe(400);
    expect(empty.json().errors).toEqual([{ parameter: 'to', detail: 'must be later than from' }]);
    const long = await svc.app.inject('/v1/models/moulding-quality/outcomes-report?from=2024-01-01T00:00:00Z&to=2026-01-01T00:00:00Z');
    expect(long.json().errors).toEqual([{ parameter: 'from', detail: 'the window may span at most 366 days' }]);
    const none = await svc.app.inject('/v1/models/press-9/outcomes-report');
    expect([none.statusCode, none.json().type]).toEqual([404, 'urn:plumbline:problem:unlogged-model']);
  });

  it('says so, with nulls and no figures, over a window whose answers have no outcome yet', async () => {
    const res = await svc.app.inject('/v1/models/moulding-quality/outcomes-report?from=2026-12-01T00:00:00Z&to=2026-12-02T00:00:00Z');
    const r = res.json() as OutcomesReport;
    expect([r.scored, r.labelled, r.accuracy.value, r.log_loss]).toEqual([0, 0, null, null]);
    expect(r.findings).toHaveLength(1);
  });
});

describe('POST /v1/models/{name}/compare on the demo day', () => {
  const text = () => readFileSync(`${DEMO_DIR}models/moulding-quality.bundle.json`, 'utf8');
  const post = (body: string, query = WINDOW) => svc.app.inject({ method: 'POST', url: `/v1/models/moulding-quality/compare?${query}`, headers: { 'content-type': 'application/json' }, payload: body });

  it('rescores the day with the bundle in the body: the logged bundle agrees with itself on every answer', async () => {
    const res = await post(text());
    expect(res.statusCode).toBe(200);
    const r = res.json();
    expect(compareReportSchema.safeParse(r).error).toBeUndefined();
    expect([r.rows, r.agreement.rows, r.labelled, r.mcnemar.p_value]).toEqual([1999, 1999, 666, 1]);
    expect(r.in_domain.candidate).toBe(r.in_domain.current);
    expect(r.accuracy.candidate).toEqual(r.accuracy.current);
    expect(r.accuracy.current.value).toBeCloseTo(report.accuracy.value as number, 14);
  });

  it('refuses a body that is not a bundle, and a bundle that takes other features, with 422 problems', async () => {
    const notBundle = await post(JSON.stringify({ format: 'plumbline-bundle/2', name: 'x' }));
    expect([notBundle.statusCode, notBundle.json().type]).toEqual([422, 'urn:plumbline:problem:invalid-bundle']);
    const { sha256: _, ...body } = JSON.parse(text());
    body.features[9].name = 'part_weight_g';
    body.reference.features[9].name = 'part_weight_g';
    const other = await post(JSON.stringify(sealBundle(body)));
    expect([other.statusCode, other.json().type]).toEqual([422, 'urn:plumbline:problem:incompatible-bundle']);
    expect(other.json().detail).toContain('part_weight_g');
    const empty = await post(text(), 'from=2026-12-01T00:00:00Z&to=2026-11-30T00:00:00Z');
    expect(empty.statusCode).toBe(400);
  });
});

describe('the drift report of a window whose answers have outcomes', () => {
  it('carries the outcomes report figures, and its page an outcomes section with the same charts', async () => {
    const drift = await svc.app.reports.run('moulding-quality', { from: DAY_START, to: DAY_END }, 'request');
    const { model: _m, window: _w, created_at: _c, ...figures } = report;
    expect(drift.outcomes).toEqual({ ...figures, findings: expect.any(Array) });
    const res = await svc.app.inject(`/v1/drift-reports/${drift.id}.html`);
    expect(res.body).toContain('<h2 id="outcomes">');
    for (const chart of ['confusion', 'reliability', 'margin']) expect(res.body).toContain(`data-chart="${chart}"`);
    const errors: string[] = [];
    parse(res.body, { onParseError: (e) => errors.push(e.code) });
    expect(errors).toEqual([]);
  });

  it('has no outcomes section over a window none of whose answers has an outcome', async () => {
    // the day's first two shots; the third is the first inspected
    const drift = await svc.app.reports.run('moulding-quality', { from: DAY_START, to: DAY_START + 60_000 }, 'request');
    expect(drift.counts.scored).toBeGreaterThan(0);
    expect(drift.outcomes).toBeUndefined();
  });
});
