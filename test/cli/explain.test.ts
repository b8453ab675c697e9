import { readFileSync } from 'node:fs';
import { afterAll, describe, expect, it } from 'vitest';
import { createExplainer } from '../../src/bundle/explainer.js';
import { createScorer } from '../../src/bundle/scorer.js';
import { readBundle } from '../../src/bundle/verify.js';
import { explainAction } from '../../src/cli/actions/explain.js';
import { tempDir } from '../helpers/datasets.js';
import { sink } from '../helpers/sink.js';

const tmp = tempDir();
afterAll(() => tmp.remove());
const DEMO = new URL('../../demo-data/models/moulding-quality.bundle.json', import.meta.url).pathname;
const V1 = new URL('../fixtures/bundles/moulding-quality-v1.bundle.json', import.meta.url).pathname;
// The first rows of the demo's faulted traffic: the cushion transducer stuck at 0 mm.
const FAULTED = readFileSync(new URL('../../demo-data/traffic-faulted.csv', import.meta.url), 'utf8').split('\n').slice(0, 4).join('\n');

describe('plumbline explain', () => {
  it('writes each answer with its explanation, one JSON line per row, to --out', async () => {
    const data = tmp.file('faulted.csv', `${FAULTED}\n`);
    const out = tmp.file('faulted.jsonl');
    const err = sink();
    const summary = await explainAction({ bundle: DEMO, data, out, batchSize: 2 }, { stdout: sink(), stderr: err, interactive: false });
    expect(summary).toEqual({ scored: 3, rejected: 0, outOfDomain: 3 });
    const lines = readFileSync(out, 'utf8').trim().split('\n').map((l) => JSON.parse(l) as Record<string, any>);
    expect(lines.map((l) => l.line)).toEqual([2, 3, 4]);
    for (const l of lines) {
      expect(Object.keys(l)).toEqual(['request_id', 'model', 'label', 'probabilities', 'margin', 'review', 'domain', 'explanation', 'line']);
      expect(l.explanation).toMatchObject({ method: 'integrated_gradients', of: l.label, baseline: 'training_mean', steps: 64, extrapolated: true });
      expect(Math.abs(l.explanation.completeness_error)).toBeLessThanOrEqual(1e-3 * Math.max(1, Math.abs(l.explanation.total)));
      expect(l.explanation.contributions.find((c: { feature: string }) => c.feature === 'cushion_mm')).toMatchObject({ value: 0, unit: 'mm' });
    }
  });

  it('explains with a version-1 bundle, its envelope bounding the changes', async () => {
    const bundle = await readBundle(V1);
    const scorer = createScorer(bundle);
    const explainer = createExplainer(bundle);
    const x = Float64Array.from([232.1, 53.8, 923, 478, 3.48, 14.18, 102, 5.4, 23.7, 47.93]);
    const o = scorer.scoreRows(x, 1)[0]!;
    const e = explainer.explain(x, o.label, o.domain.in_domain);
    expect(Math.abs(e.completeness_error)).toBeLessThanOrEqual(1e-3 * Math.max(1, Math.abs(e.total)));
    expect(explainer.labelOf(x, 1)[0]).toBe(bundle.file.classes.indexOf(o.label));
    const env = bundle.file.domain.envelope;
    for (const n of e.nearest_changes) {
      const j = bundle.file.features.findIndex((f) => f.name === n.feature);
      expect(n.to).toBeGreaterThanOrEqual(env.low[j] as number);
      expect(n.to).toBeLessThanOrEqual(env.high[j] as number);
      const moved = x.slice();
      moved[j] = n.to;
      expect(scorer.scoreRows(moved, 1)[0]!.label).toBe(n.label);
    }
  });
});
