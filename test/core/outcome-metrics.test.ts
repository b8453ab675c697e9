import { describe, expect, it } from 'vitest';
import { MARGIN_BANDS, reliability, summariseOutcomes } from '../../src/core/outcome-metrics.js';
import { fisherExactTwoSided, mcnemarExact } from '../../src/core/stats/exact-tests.js';
import reference from '../fixtures/outcome-reference.json' with { type: 'json' };

// Every expected value here comes from test/fixtures/make-outcome-fixtures.py (scikit-learn 1.2,
// scipy 1.10), a published table, or a closed form named beside it.

type Case = (typeof reference.cases)[number];

function answers(c: Case) {
  const K = c.classes;
  const probabilities = Float64Array.from(c.probabilities.flat());
  const predicted = c.probabilities.map((row) => row.indexOf(Math.max(...row)));
  return { classes: K, actual: c.actual, predicted, probabilities, margin: c.margin, inDomain: c.in_domain, review: c.review };
}

describe('summariseOutcomes against scikit-learn and scipy', () => {
  reference.cases.forEach((c, i) => {
    const m = summariseOutcomes(answers(c));
    const e = c.expected;

    it(`case ${i}: accuracy and confusion matrix match accuracy_score and confusion_matrix (rows actual, columns predicted)`, () => {
      expect(m.labelled).toBe(c.actual.length);
      expect(m.accuracy.value).toBeCloseTo(e.accuracy, 14);
      expect(m.confusion).toEqual(e.confusion);
    });

    it(`case ${i}: per-class precision, recall and F1 match precision_recall_fscore_support where defined`, () => {
      m.classes.forEach((k, j) => {
        expect(k.rows).toBe(e.support[j]);
        if (k.precision !== null) expect(k.precision).toBeCloseTo(e.precision[j] as number, 14);
        else expect(e.precision[j]).toBe(0); // no answers of the class: scikit-learn's zero_division
        if (k.recall !== null) expect(k.recall).toBeCloseTo(e.recall[j] as number, 14);
        if (k.f1 !== null) expect(k.f1).toBeCloseTo(e.f1[j] as number, 14);
      });
    });

    it(`case ${i}: log-loss matches log_loss and Brier the sum of brier_score_loss over one-vs-rest classes`, () => {
      expect(m.log_loss).toBeCloseTo(e.log_loss, 12);
      expect(m.brier).toBeCloseTo(e.brier, 12);
    });

    it(`case ${i}: reliability bins match calibration_curve(n_bins=10) and ECE follows Guo et al. (2017) eq. 3`, () => {
      const used = m.ece.bins.map((b, j) => ({ ...b, j })).filter((b) => b.rows > 0);
      expect(used.map((b) => b.j)).toEqual(e.reliability.bins);
      expect(used.map((b) => b.rows)).toEqual(e.reliability.rows);
      used.forEach((b, j) => {
        expect(b.accuracy).toBeCloseTo(e.reliability.accuracy[j] as number, 12);
        expect(b.confidence).toBeCloseTo(e.reliability.confidence[j] as number, 12);
      });
      expect(m.ece.value).toBeCloseTo(e.reliability.ece, 12);
    });

    it(`case ${i}: in- and out-of-domain accuracy and Fisher's exact p match scipy.stats.fisher_exact`, () => {
      const [[ir, iw], [or, ow]] = e.domain_table as [[number, number], [number, number]];
      expect(m.by_domain.in_domain).toEqual({ rows: ir + iw, accuracy: ir / (ir + iw) });
      expect(m.by_domain.out_of_domain).toEqual({ rows: or + ow, accuracy: or / (or + ow) });
      expect(m.by_domain.p_value).toBeCloseTo(e.fisher_p, 12);
      expect(Math.abs((m.by_domain.p_value as number) / e.fisher_p - 1)).toBeLessThan(1e-9);
    });

    it(`case ${i}: margin bands and the review split count as the numpy masks of the script`, () => {
      expect(m.by_margin.map((b) => [b.low, b.high, b.rows])).toEqual(e.by_margin.map((b) => [b.low, b.high, b.rows]));
      m.by_margin.forEach((b, j) => expect(b.accuracy).toBeCloseTo(e.by_margin[j]?.accuracy as number, 14));
      expect(m.review.rows).toBe(e.review.rows);
      expect(m.review.accuracy).toBeCloseTo(e.review.accuracy as number, 14);
      expect(m.not_review.accuracy).toBeCloseTo(e.not_review.accuracy as number, 14);
    });
  });

  it('gives the Wilson interval of Newcombe (1998), Table I, method 3, for 81 right of 263: 0.2553 to 0.3662', () => {
    const n = 263;
    const actual = Array.from({ length: n }, (_, r) => (r < 81 ? 0 : 1));
    const m = summariseOutcomes({ classes: 2, actual, predicted: new Array(n).fill(0), probabilities: new Float64Array(2 * n).fill(0.5), margin: new Array(n).fill(0), inDomain: new Array(n).fill(true), review: new Array(n).fill(false) });
    expect([m.accuracy.ci_low, m.accuracy.ci_high].map((v) => (v as number).toFixed(4))).toEqual(['0.2553', '0.3662']);
  });

  it('answers nulls, not NaN, without labelled rows', () => {
    const m = summariseOutcomes({ classes: 3, actual: [], predicted: [], probabilities: [], margin: [], inDomain: [], review: [] });
    expect(m.accuracy).toEqual({ value: null, ci_low: null, ci_high: null });
    expect([m.log_loss, m.brier, m.ece.value, m.by_domain.p_value]).toEqual([null, null, null, null]);
    expect(m.classes.every((k) => k.precision === null && k.recall === null && k.rows === 0)).toBe(true);
    expect(m.by_margin).toHaveLength(MARGIN_BANDS.length);
  });

  it('puts a top probability of exactly 1 in the last reliability bin and 0.1 in the second', () => {
    const r = reliability([1, 0.1, 0.55], [true, false, true]);
    expect(r.bins[9]?.rows).toBe(1);
    expect(r.bins[1]?.rows).toBe(1);
    expect(r.bins[5]?.rows).toBe(1);
    // closed form: (|1 - 1| + |0 - 0.1| + |1 - 0.55|) / 3
    expect(r.value).toBeCloseTo(0.55 / 3, 15);
  });
});

describe("Fisher's exact test, two-sided", () => {
  it("gives 17/35 for Fisher's (1935) tea-tasting table [[3, 1], [1, 3]]: closed form, the hypergeometric tables have probabilities 1, 16, 36, 16, 1 in 70", () => {
    expect(fisherExactTwoSided(3, 1, 1, 3)).toBeCloseTo((1 + 16 + 16 + 1) / 70, 14);
  });

  it('matches scipy.stats.fisher_exact to a relative 1e-9 on assorted tables', () => {
    for (const t of reference.fisher) {
      const [[a, b], [c, d]] = t.table as [[number, number], [number, number]];
      const p = fisherExactTwoSided(a, b, c, d);
      expect(Math.abs(p - t.p_value) / t.p_value).toBeLessThan(1e-9);
    }
  });
});

describe("McNemar's exact test", () => {
  it('matches scipy.stats.binomtest(b, b + c, 0.5) on the discordant pairs', () => {
    for (const t of reference.mcnemar) expect(mcnemarExact(t.b, t.c)).toBeCloseTo(t.p_value, 14);
  });

  it('is symmetric in the two discordant counts and 1 with none', () => {
    expect(mcnemarExact(3, 12)).toBe(mcnemarExact(12, 3));
    expect(mcnemarExact(0, 0)).toBe(1);
  });
});
