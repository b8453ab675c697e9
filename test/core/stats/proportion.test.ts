import binomialTest from '@stdlib/stats-binomial-test';
import { describe, expect, it } from 'vitest';
import { binomialUpperTail, wilsonInterval } from '../../../src/core/stats/proportion.js';
import reference from '../../fixtures/drift-reference.json' with { type: 'json' };

describe('Wilson score interval', () => {
  it('reproduces the worked examples of Newcombe (1998), Table I, method 3: 81/263 and 15/148', () => {
    // printed to four places in the paper: 0.2553-0.3662 and 0.0624-0.1605
    const a = wilsonInterval(81, 263);
    expect([a.low, a.high].map((v) => v.toFixed(4))).toEqual(['0.2553', '0.3662']);
    const b = wilsonInterval(15, 148);
    expect([b.low, b.high].map((v) => v.toFixed(4))).toEqual(['0.0624', '0.1605']);
  });

  it('matches statsmodels proportion_confint(method="wilson") to 12 digits, edge cases 0/n and n/n included', () => {
    for (const c of reference.wilson) {
      const w = wilsonInterval(c.k, c.n);
      expect(w.low).toBeCloseTo(c.low, 12);
      expect(w.high).toBeCloseTo(c.high, 12);
    }
    expect(wilsonInterval(0, 20).low).toBe(0);
    expect(wilsonInterval(29, 29).high).toBe(1);
  });
});

describe('exact binomial test', () => {
  it('matches scipy.stats.binomtest(alternative="greater") and @stdlib/stats-binomial-test', () => {
    for (const c of reference.binomial) {
      expect(binomialUpperTail(c.k, c.n, c.p)).toBeCloseTo(c.p_value, 12);
      if (c.k > 0) expect(binomialUpperTail(c.k, c.n, c.p)).toBeCloseTo(binomialTest(c.k, c.n, { p: c.p, alternative: 'greater' }).pValue, 10);
    }
  });
});
