import binomialTest from '@stdlib/stats-binomial-test';
import { describe, expect, it } from 'vitest';
import { binomialUpperTail, clopperPearsonInterval, wilsonInterval } from '../../../src/core/stats/proportion.js';
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

describe('Clopper–Pearson interval', () => {
  it('reproduces Newcombe (1998), Table I, method 5 (exact), for 81/263, 15/148, 0/20 and 1/29', () => {
    // Four places as printed (from memory; @stdlib/stats-binomial-test, below, gives the same).
    const cases: Array<[number, number, string, string]> = [[81, 263, '0.2527', '0.3676'], [15, 148, '0.0578', '0.1617'], [0, 20, '0.0000', '0.1684'], [1, 29, '0.0009', '0.1776']];
    for (const [k, n, low, high] of cases) {
      const ci = clopperPearsonInterval(k, n);
      expect([ci.low.toFixed(4), ci.high.toFixed(4)]).toEqual([low, high]);
    }
  });

  it('matches the interval of @stdlib/stats-binomial-test (the exact test of R binom.test) to 12 digits', () => {
    for (const [k, n] of [[3, 7], [1, 105], [2, 398], [17, 1000], [0, 5], [5, 5], [1, 2]] as const) {
      const ci = clopperPearsonInterval(k, n);
      const ref = binomialTest(k, n).ci as number[];
      expect(ci.low).toBeCloseTo(ref[0] as number, 12);
      expect(ci.high).toBeCloseTo(ref[1] as number, 12);
    }
  });

  it('has the closed forms of its ends at 0/n and n/n: 1 - (a/2)^(1/n) and (a/2)^(1/n)', () => {
    expect(clopperPearsonInterval(0, 50).high).toBeCloseTo(1 - 0.025 ** (1 / 50), 12);
    expect(clopperPearsonInterval(50, 50).low).toBeCloseTo(0.025 ** (1 / 50), 12);
  });
});
