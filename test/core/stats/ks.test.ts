import kstest from '@stdlib/stats-kstest';
import { describe, expect, it } from 'vitest';
import { createRng } from '../../../src/core/rng.js';
import { kolmogorovSurvival, ksExactPValue, ksStatistic, ksTest } from '../../../src/core/stats/ks.js';
import reference from '../../fixtures/drift-reference.json' with { type: 'json' };

const sorted = (xs: number[]) => Float64Array.from(xs).sort();

describe('two-sample Kolmogorov-Smirnov', () => {
  // scipy 1.10 stats.ks_2samp(a, b, method="exact") and special.kolmogorov, by
  // test/fixtures/make-drift-fixtures.py
  reference.ks.forEach((c, i) => {
    it(`matches scipy's statistic and exact p-value, case ${i + 1} (${c.a.length} x ${c.b.length}, D = ${c.d.toFixed(4)})`, () => {
      const a = sorted(c.a);
      const b = sorted(c.b);
      const { d, h } = ksStatistic(a, b);
      expect(d).toBeCloseTo(c.d, 14);
      expect(ksExactPValue(a.length, b.length, h)).toBeCloseTo(c.p_exact, 10);
      expect(kolmogorovSurvival(Math.sqrt((a.length * b.length) / (a.length + b.length)) * d)).toBeCloseTo(c.p_asymptotic, 12);
    });
  });

  it('puts the asymptotic 5% and 1% points at the large-sample critical values 1.36 and 1.63 of the NIST/SEMATECH e-Handbook KS section (section number and values from memory)', () => {
    // D_crit = c(alpha) sqrt((m + n) / (m n)) for large samples, c(0.05) = 1.36, c(0.01) = 1.63
    expect(kolmogorovSurvival(1.36)).toBeCloseTo(0.05, 2);
    expect(kolmogorovSurvival(1.63)).toBeCloseTo(0.01, 2);
  });

  it('agrees with the limiting distribution that @stdlib/stats-kstest uses for one large sample against a step CDF', () => {
    // kstest against a uniform CDF for n = 5000 uniform draws gives the one-sample p-value; the
    // two-sample asymptotic p-value at the same sqrt(n) D must be close to it.
    const rng = createRng(3);
    const x = Array.from({ length: 5000 }, () => rng.next());
    const one = kstest(x, 'uniform', 0, 1);
    expect(kolmogorovSurvival(Math.sqrt(5000) * one.statistic)).toBeCloseTo(one.pValue, 2);
  });

  it('gives exact and asymptotic p-values that agree for large samples', () => {
    const rng = createRng(11);
    const a = sorted(Array.from({ length: 3000 }, () => rng.normal()));
    const b = sorted(Array.from({ length: 2500 }, () => rng.normal() + 0.05));
    const { d, h } = ksStatistic(a, b);
    const exact = ksExactPValue(3000, 2500, h);
    const asym = kolmogorovSurvival(Math.sqrt((3000 * 2500) / 5500) * d);
    expect(Math.abs(exact - asym)).toBeLessThan(0.01);
    expect(ksTest(a, b).method).toBe('exact');
  });

  it('handles ties, identical samples and disjoint samples', () => {
    expect(ksStatistic([1, 1, 2, 2], [1, 2, 2, 2]).d).toBeCloseTo(0.25, 15);
    expect(ksTest([1, 2, 3], [1, 2, 3])).toEqual({ d: 0, p_value: 1, method: 'exact' });
    // disjoint samples of 5 and 5: only 2 of C(10, 5) = 252 orderings reach D = 1
    expect(ksTest([1, 2, 3, 4, 5], [6, 7, 8, 9, 10]).p_value).toBeCloseTo(2 / 252, 14);
  });
});
