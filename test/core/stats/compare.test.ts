import { describe, expect, it } from 'vitest';
import { benjaminiHochberg, chiSquareGoodnessOfFit, jensenShannonDistance, psi, psiBand, wasserstein1 } from '../../../src/core/stats/compare.js';
import reference from '../../fixtures/drift-reference.json' with { type: 'json' };

describe('population stability index', () => {
  it('follows its definition on a case worked by hand', () => {
    // (0.3 - 0.5) ln(0.3 / 0.5) + (0.7 - 0.5) ln(0.7 / 0.5) = 0.10217 + 0.06729 = 0.16946
    expect(psi([0.3, 0.7], [0.5, 0.5])).toBeCloseTo(0.2 * Math.log(5 / 3) + 0.2 * Math.log(7 / 5), 14);
    expect(psi([0.25, 0.25, 0.5], [0.25, 0.25, 0.5])).toBe(0);
  });

  it('floors empty bins at 1e-4 so that the index stays finite', () => {
    expect(psi([0, 1], [0.5, 0.5])).toBeCloseTo((1e-4 - 0.5) * Math.log(1e-4 / 0.5) + 0.5 * Math.log(2), 12);
  });

  it('falls in the bands of common practice: < 0.1 stable, 0.1-0.25 watch, >= 0.25 shifted', () => {
    expect([0, 0.0999, 0.1, 0.2499, 0.25, 3].map(psiBand)).toEqual(['stable', 'stable', 'watch', 'watch', 'shifted', 'shifted']);
  });
});

describe('Wasserstein-1', () => {
  it('is the shift between two copies of one sample, as worked by hand', () => {
    expect(wasserstein1([1, 2, 3], [3, 4, 5])).toBeCloseTo(2, 15);
    expect(wasserstein1([0, 1], [0, 0, 1, 1])).toBe(0);
  });

  it('matches scipy.stats.wasserstein_distance (fixture)', () => {
    for (const c of reference.wasserstein) {
      expect(wasserstein1(Float64Array.from(c.a).sort(), Float64Array.from(c.b).sort())).toBeCloseTo(c.w1, 12);
    }
  });
});

describe('Jensen-Shannon distance, base 2', () => {
  it('is 0 for equal and 1 for disjoint distributions (Lin 1991)', () => {
    expect(jensenShannonDistance([0.2, 0.8], [0.2, 0.8])).toBe(0);
    expect(jensenShannonDistance([1, 0], [0, 1])).toBeCloseTo(1, 15);
  });

  it('matches scipy.spatial.distance.jensenshannon(base=2) (fixture)', () => {
    for (const c of reference.jensenshannon) expect(jensenShannonDistance(c.p, c.q)).toBeCloseTo(c.distance, 14);
  });
});

describe('chi-square goodness of fit', () => {
  it('matches scipy.stats.chisquare (fixture)', () => {
    for (const c of reference.chisquare) {
      const total = c.observed.reduce((a, b) => a + b, 0);
      const r = chiSquareGoodnessOfFit(c.observed, c.expected.map((e) => e / total));
      expect(r.statistic).toBeCloseTo(c.statistic, 12);
      expect(r.p_value).toBeCloseTo(c.p_value, 10);
      expect(r.df).toBe(c.observed.length - 1);
    }
  });

  it('puts p = 0.05 and 0.01 at the critical values of the NIST/SEMATECH e-Handbook table 1.3.6.7.4', () => {
    // 4 categories (df 3): 7.815 at 0.05 and 11.345 at 0.01. Observed counts built to give them.
    const at = (target: number) => {
      // two cells of 100 expected each shifted by +-x: statistic 2 x^2 / 100 ... with 4 equal cells
      const x = Math.sqrt((target * 100) / 2);
      return chiSquareGoodnessOfFit([100 + x, 100 - x, 100, 100], [0.25, 0.25, 0.25, 0.25]);
    };
    expect(at(7.815).p_value).toBeCloseTo(0.05, 4);
    expect(at(11.345).p_value).toBeCloseTo(0.01, 4);
  });

  it('gives p = 0 for a count in a class the reference never saw', () => {
    expect(chiSquareGoodnessOfFit([5, 1], [1, 0]).p_value).toBe(0);
  });
});

describe('Benjamini-Hochberg', () => {
  it('rejects exactly the four smallest of the 15 p-values of the worked example in Benjamini & Hochberg (1995) at q = 0.05', () => {
    const adjusted = benjaminiHochberg(reference.bh.p);
    expect(adjusted.map((a) => a <= 0.05)).toEqual(reference.bh.reject);
    expect(adjusted.filter((a) => a <= 0.05)).toHaveLength(4);
    // and the adjusted values match statsmodels multipletests(method="fdr_bh")
    adjusted.forEach((a, i) => expect(a).toBeCloseTo(reference.bh.adjusted[i]!, 14));
  });

  it('keeps the order of its input and never exceeds 1', () => {
    expect(benjaminiHochberg([0.5, 0.01, 0.9])).toEqual([0.75, 0.03, 0.9]);
  });
});
