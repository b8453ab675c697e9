import { describe, expect, it } from 'vitest';
import { quantileSorted } from '../../../src/core/describe.js';
import { featuresOutside, fitEnvelope, roundOutward } from '../../../src/core/domain/envelope.js';

describe('operating envelope (common practice)', () => {
  const n = 1001;
  // column 0: 0..1000; column 1: constant 7
  const x = Float64Array.from({ length: n * 2 }, (_, i) => (i % 2 === 0 ? i / 2 : 7));

  it('widens the 0.1% and 99.9% quantiles by the tolerance times their range', () => {
    const env = fitEnvelope(x, n, 2, 0.1);
    const sorted = Float64Array.from({ length: n }, (_, i) => i);
    const lo = quantileSorted(sorted, 0.001); // 1
    const hi = quantileSorted(sorted, 0.999); // 999
    expect([lo, hi]).toEqual([1, 999]);
    // -98.8 and 1098.8, rounded outwards to 5 significant digits of the range 998 (steps of 0.01)
    expect([env.low[0], env.high[0]]).toEqual([-98.8, 1098.8]);
  });

  it('keeps a constant feature to its one value', () => {
    const env = fitEnvelope(x, n, 2, 0.1);
    expect([env.low[1], env.high[1]]).toEqual([7, 7]);
    expect(featuresOutside(env, [500, 7])).toEqual([]);
    expect(featuresOutside(env, [500, 7.001])).toEqual([1]);
  });

  it('names every feature outside, and counts NaN as outside', () => {
    const env = fitEnvelope(x, n, 2, 0);
    expect(featuresOutside(env, [-5, 8])).toEqual([0, 1]);
    expect(featuresOutside(env, [Number.NaN, 7])).toEqual([0]);
  });

  it('rounds bounds outwards to five significant digits of the range, never inwards beyond float noise', () => {
    // float noise beyond 12 significant digits is dropped first, then the bounds round outwards
    expect(roundOutward(2.0250000000000004, 27.278000000000002, 25)).toEqual([2.025, 27.278]);
    expect(roundOutward(2.02501, 27.27801, 25)).toEqual([2.025, 27.279]);
    expect(roundOutward(-123456.7, 987654.3, 1e6)).toEqual([-123500, 987700]); // steps of 100
    expect(roundOutward(0.30000000000000004, 0.7, 0.4)).toEqual([0.3, 0.7]);
    const [lo, hi] = roundOutward(1.23456789, 1.98765432, 0.75);
    expect(lo).toBeLessThanOrEqual(1.23456789);
    expect(hi).toBeGreaterThanOrEqual(1.98765432);
    expect(roundOutward(5, 5, 0)).toEqual([5, 5]);
  });
});
