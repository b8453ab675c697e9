import { readFileSync } from 'node:fs';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { BundleFile } from '../../src/bundle/schema.js';
import { recomputedExplanationSchema } from '../../src/contracts/explanation.js';
import { scoreResponseSchema } from '../../src/contracts/score.js';
import { type TestService, startTestService } from '../helpers/service.js';

const demo = JSON.parse(readFileSync(new URL('../../demo-data/models/moulding-quality.bundle.json', import.meta.url), 'utf8')) as BundleFile;
const names = demo.features.map((f) => f.name);
// A shot of the demo's own traffic (demo-data/traffic-nominal.csv style values) and the same
// shot with the cushion transducer stuck at 0 mm, the demo's faulted scenario.
const IN_DOMAIN = [232.1, 53.8, 923, 478, 3.48, 14.18, 102, 5.4, 23.7, 47.93];
const STUCK = [238.7, 54.2, 911, 471, 3.43, 12.9, 110, 0, 22.28, 48.51];

let svc: TestService;
beforeAll(async () => {
  svc = await startTestService({ bundles: [demo] });
});
afterAll(async () => {
  await svc.close();
});

interface Answer {
  request_id: string;
  label: string;
  domain: { in_domain: boolean };
  explanation?: {
    of: string;
    total: number;
    completeness_error: number;
    contributions: Array<{ feature: string; value: number; baseline: number; contribution: number }>;
    nearest_changes: Array<{ feature: string; unit: string; from: number; to: number; change: number; label: string }>;
    extrapolated: boolean;
  };
}

const score = async (features: number[], explain?: boolean): Promise<Answer> => {
  const res = await svc.app.inject({ method: 'POST', url: '/v1/models/moulding-quality/score', payload: explain === undefined ? { features } : { features, explain } });
  expect(res.statusCode).toBe(200);
  return res.json() as Answer;
};

describe('explanations of answers', () => {
  it('are given only on request, and the audit row records whether one was', async () => {
    const plain = await score(IN_DOMAIN);
    expect(plain.explanation).toBeUndefined();
    const asked = await score(IN_DOMAIN, true);
    expect(scoreResponseSchema.parse(asked)).toEqual(asked);
    expect(asked.explanation?.of).toBe(asked.label);
    const rows = svc.rows('SELECT request_id, explained FROM scored_requests');
    expect(rows).toContainEqual({ request_id: plain.request_id, explained: 0 });
    expect(rows).toContainEqual({ request_id: asked.request_id, explained: 1 });
    const logged = (await svc.app.inject({ url: `/v1/requests?limit=2` })).json() as { items: Array<{ request_id: string; explained: boolean }> };
    expect(logged.items.map((i) => [i.request_id, i.explained])).toEqual([
      [asked.request_id, true],
      [plain.request_id, false],
    ]);
  });

  for (const [name, x, inDomain] of [
    ['an in-domain shot', IN_DOMAIN, true],
    ['the stuck-transducer shot', STUCK, false],
  ] as const) {
    it(`add up for ${name}, and each nearest change re-scores to its label, the old one a hair before`, async () => {
      const a = await score([...x], true);
      const e = a.explanation!;
      expect(a.domain.in_domain).toBe(inDomain);
      expect(e.extrapolated).toBe(!inDomain);
      // completeness (Sundararajan et al. 2017): within 1e-3 max(1, |total|)
      expect(Math.abs(e.completeness_error)).toBeLessThanOrEqual(1e-3 * Math.max(1, Math.abs(e.total)));
      expect(e.contributions.reduce((s, c) => s + c.contribution, 0)).toBeCloseTo(e.total, 12);
      expect(e.contributions.map((c) => c.feature).sort()).toEqual([...names].sort());
      const sizes = e.contributions.map((c) => Math.abs(c.contribution));
      expect(sizes).toEqual([...sizes].sort((p, q) => q - p));
      // the baseline is the training mean the bundle's reference section stores
      for (const c of e.contributions) expect(c.baseline).toBe(demo.reference.features[names.indexOf(c.feature)]?.mean);
      for (const n of e.nearest_changes) {
        const j = names.indexOf(n.feature);
        const low = demo.domain.envelope.low[j] as number;
        const high = demo.domain.envelope.high[j] as number;
        expect(n.to).toBeGreaterThanOrEqual(low);
        expect(n.to).toBeLessThanOrEqual(high);
        expect(n.change).toBe(n.to - n.from);
        const at = [...x];
        at[j] = n.to;
        expect((await score(at)).label).toBe(n.label);
        const hair = 1e-6 * (high - low);
        at[j] = n.to - Math.sign(n.change) * hair;
        expect((await score(at)).label).toBe(a.label);
      }
      if (inDomain) expect(e.nearest_changes.length).toBeGreaterThan(0);
    });
  }

  it('are asked per item in a batch', async () => {
    const res = await svc.app.inject({ method: 'POST', url: '/v1/models/moulding-quality/score-batch', payload: { items: [{ features: IN_DOMAIN, explain: true }, { features: STUCK }, { features: STUCK, explain: false }] } });
    expect(res.statusCode).toBe(200);
    const items = (res.json() as { items: Answer[] }).items;
    expect(items.map((i) => i.explanation !== undefined)).toEqual([true, false, false]);
    const rows = svc.rows('SELECT request_id, explained FROM scored_requests');
    expect(items.map((i) => rows.find((r) => r.request_id === i.request_id)?.explained)).toEqual([1, 0, 0]);
  });

  it('stay finite and bounded for a vector at the largest accepted magnitude', async () => {
    for (const v of [1e15, -1e15, 1e6]) {
      const a = await score(Array.from({ length: 10 }, () => v), true);
      const e = a.explanation!;
      expect(e.extrapolated).toBe(true);
      expect(JSON.stringify(e)).not.toContain('null');
      expect(Number.isFinite(e.total)).toBe(true);
      expect(Math.abs(e.completeness_error)).toBeLessThanOrEqual(1e-3 * Math.max(1, Math.abs(e.total)));
    }
  });

  it('refuse an explain that is not a boolean, naming the field', async () => {
    const res = await svc.app.inject({ method: 'POST', url: '/v1/models/moulding-quality/score', payload: { features: IN_DOMAIN, explain: 'yes' } });
    expect(res.statusCode).toBe(400);
    expect(JSON.stringify(res.json().errors)).toContain('/explain');
  });
});

describe('GET /v1/requests/{id}/explanation', () => {
  it('recomputes the explanation an answer carried, from the row and the bundle', async () => {
    const a = await score(STUCK, true);
    const res = await svc.app.inject({ url: `/v1/requests/${a.request_id}/explanation` });
    expect(res.statusCode).toBe(200);
    const body = res.json();
    expect(recomputedExplanationSchema.parse(body)).toEqual(body);
    expect(body).toEqual({ request_id: a.request_id, model: { name: 'moulding-quality', version: demo.version, sha256: demo.sha256 }, label: a.label, in_domain: false, explained: true, explanation: a.explanation });
  });

  it('explains an answer that was given without one, saying so', async () => {
    const a = await score(IN_DOMAIN);
    const body = (await svc.app.inject({ url: `/v1/requests/${a.request_id}/explanation` })).json();
    expect(body.explained).toBe(false);
    expect(body.explanation).toEqual((await score(IN_DOMAIN, true)).explanation);
  });

  it('uses the stored copy of a bundle that is no longer loaded', async () => {
    const a = await score(IN_DOMAIN, true);
    // Unload it: the registry no longer holds it; the audit log kept its bundle.
    const entry = svc.registry.get('moulding-quality')!;
    const get = svc.registry.get.bind(svc.registry);
    svc.registry.get = (name: string) => (name === 'moulding-quality' ? undefined : get(name));
    try {
      const body = (await svc.app.inject({ url: `/v1/requests/${a.request_id}/explanation` })).json();
      expect(body.explanation).toEqual(a.explanation);
    } finally {
      svc.registry.get = get;
    }
    expect(entry.bundle.file.sha256).toBe(demo.sha256);
  });

  it('answers 404 for an id the log does not hold', async () => {
    const res = await svc.app.inject({ url: '/v1/requests/0190f0f0-0000-7000-8000-000000000000/explanation' });
    expect(res.statusCode).toBe(404);
    expect(res.headers['content-type']).toContain('application/problem+json');
    expect(res.json().detail).toContain('0190f0f0-0000-7000-8000-000000000000');
  });
});
