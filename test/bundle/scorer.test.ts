import { describe, expect, it } from 'vitest';
import { ScoreOverflowError, createScorer, modelRef } from '../../src/bundle/scorer.js';
import { DETECTORS } from '../../src/core/domain/detectors.js';
import { parseBundle } from '../../src/bundle/verify.js';
import { serializeBundle } from '../../src/bundle/write.js';
import { irisBundle } from '../helpers/bundles.js';

const { bundle } = irisBundle();
const loaded = parseBundle(serializeBundle(bundle), 'iris.bundle.json');
const scorer = createScorer(loaded);
const env = bundle.domain.envelope;

describe('scorer', () => {
  it('answers with probabilities over every class that sum to 1, the label of the largest and the margin', () => {
    const [o] = scorer.scoreRows(Float64Array.of(6.0, 2.9, 4.5, 1.5), 1);
    const p = Object.values(o!.probabilities);
    expect(Object.keys(o!.probabilities)).toEqual(bundle.classes);
    expect(p.reduce((a, b) => a + b, 0)).toBeCloseTo(1, 14);
    const sorted = [...p].sort((a, b) => b - a);
    expect(o!.probabilities[o!.label]).toBe(sorted[0]);
    expect(o!.margin).toBeCloseTo(sorted[0]! - sorted[1]!, 15);
  });

  it('names a feature pushed outside the envelope with its value, its training range and unit', () => {
    const x = Float64Array.of(5.8, 3.0, 4.35, 1.3);
    x[1] = (env.high[1] as number) + 0.5;
    const [o] = scorer.scoreRows(x, 1);
    expect(o!.domain.in_domain).toBe(false);
    expect(o!.review).toBe(true);
    const range = bundle.domain.envelope.range;
    expect(range.high[1]).toBeLessThanOrEqual(env.high[1] as number);
    expect(o!.domain.outside).toEqual([{ feature: 'sepal_width', value: x[1], low: range.low[1], high: range.high[1], unit: 'cm' }]);
    expect(o!.domain.checks[0]).toEqual({ detector: 'envelope', value: 1, threshold: 0, passed: false });
    // the detectors that vote, in answer order; a detector the bundle left out is not checked
    const voting = DETECTORS.filter((d) => d === 'envelope' || bundle.domain[d] !== undefined);
    expect(voting).toEqual(expect.arrayContaining(['envelope', 'input_mahalanobis', 'feature_mahalanobis']));
    expect(o!.domain.checks.map((c) => c.detector)).toEqual(voting);
    for (const l of bundle.domain.left_out) expect(o!.domain.checks.map((c) => c.detector)).not.toContain(l.detector);
    for (const c of o!.domain.checks) expect(c.passed).toBe(c.value <= c.threshold);
  });

  it('passes a row inside the envelope and marks it for review only when the margin is small', () => {
    const rows = scorer.scoreRows(Float64Array.of(5.1, 3.5, 1.4, 0.2, 6.3, 2.8, 4.9, 1.6), 2);
    for (const o of rows) {
      expect(o.domain.in_domain).toBe(true);
      expect(o.domain.outside).toEqual([]);
      expect(o.review).toBe(o.margin < bundle.domain.review_margin);
    }
    expect(rows[0]!.review).toBe(false);
  });

  it('refuses to answer when the network overflows, naming the row, rather than returning NaN', () => {
    const huge = { ...loaded, members: loaded.members.map((net) => ({ layers: net.layers.map((l, i) => (i < 2 ? { ...l, weights: l.weights.map(() => 1e300) } : l)) })) };
    const s = createScorer(huge);
    // row 0 standardises to a negative sum, which the ReLU zeroes; row 1 overflows to Infinity
    const err = (() => {
      try {
        s.scoreRows(Float64Array.of(5, 3, 1, 0.2, 1e6, 1e6, 1e6, 1e6), 2);
      } catch (e) {
        return e;
      }
      return null;
    })();
    expect(err).toBeInstanceOf(ScoreOverflowError);
    expect((err as ScoreOverflowError).row).toBe(1);
  });

  it('identifies the model by name, version and sha256', () => {
    expect(modelRef(loaded)).toEqual({ name: 'iris', version: '1', sha256: bundle.sha256 });
  });
});
