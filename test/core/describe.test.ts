import { describe, expect, it } from 'vitest';
import { binIndex, meanAndStd, quantileSorted, sortedCopy } from '../../src/core/describe.js';
import reference from '../fixtures/core-reference.json' with { type: 'json' };

describe('quantiles', () => {
  it('match numpy.quantile (Hyndman & Fan definition 7) at every level the bundle stores', () => {
    const q = reference.quantiles;
    const sorted = sortedCopy(q.sample);
    q.levels.forEach((p, i) => expect(quantileSorted(sorted, p)).toBeCloseTo(q.values[i]!, 12));
  });

  it('interpolate between order statistics, as worked by hand', () => {
    // n = 5, p = 0.3: h = 1.2, so x(1) + 0.2 (x(2) - x(1)) = 2 + 0.2 * 1 = 2.2 (0-based order statistics)
    expect(quantileSorted([1, 2, 3, 4, 5], 0.3)).toBeCloseTo(2.2, 15);
    expect(quantileSorted([7], 0.5)).toBe(7);
  });

  it('refuses an empty sample and a level outside [0, 1]', () => {
    expect(() => quantileSorted([], 0.5)).toThrow(/empty/);
    expect(() => quantileSorted([1], 1.5)).toThrow(/level/);
  });
});

describe('mean and standard deviation', () => {
  it('match numpy.mean and numpy.std (population, ddof = 0)', () => {
    const s = meanAndStd(reference.quantiles.sample);
    expect(s.mean).toBeCloseTo(reference.quantiles.mean, 12);
    expect(s.std).toBeCloseTo(reference.quantiles.std, 12);
  });

  it('stay exact for a large offset, where the naive sum of squares loses every digit', () => {
    const s = meanAndStd([1e9 + 4, 1e9 + 7, 1e9 + 13, 1e9 + 16]);
    expect(s.mean).toBe(1e9 + 10);
    expect(s.std).toBeCloseTo(Math.sqrt(22.5), 9); // deviations -6, -3, 3, 6: variance 90 / 4
  });
});

describe('bins', () => {
  it('put v in (e[i-1], e[i]]: values on an edge belong to the bin below it', () => {
    const edges = [1, 2, 3];
    expect([0, 1, 1.5, 2, 2.5, 3, 9].map((v) => binIndex(edges, v))).toEqual([0, 0, 1, 1, 2, 2, 3]);
  });
});
