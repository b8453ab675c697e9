import { describe, expect, it } from 'vitest';
import { brierScore, classificationMetrics, confusionMatrix, logLoss } from '../../src/core/metrics.js';
import reference from '../fixtures/core-reference.json' with { type: 'json' };

describe('classification metrics', () => {
  // scikit-learn 1.2 confusion_matrix, precision_recall_fscore_support(zero_division=0) and
  // f1_score(average="macro"), from test/fixtures/make-core-fixtures.py; class 3 is never predicted.
  const r = reference.metrics;
  const m = classificationMetrics(r.actual, r.predicted, r.classes);

  it('counts the confusion matrix as scikit-learn does (rows actual, columns predicted)', () => {
    expect(m.confusion).toEqual(r.confusion);
  });

  it('matches scikit-learn accuracy, per-class precision, recall, F1 and support', () => {
    expect(m.accuracy).toBeCloseTo(r.accuracy, 15);
    m.per_class.forEach((c, k) => {
      expect(c.precision).toBeCloseTo(r.precision[k]!, 14);
      expect(c.recall).toBeCloseTo(r.recall[k]!, 14);
      expect(c.f1).toBeCloseTo(r.f1[k]!, 14);
      expect(c.support).toBe(r.support[k]);
    });
    expect(m.per_class[3]!.precision).toBe(0);
  });

  it('matches scikit-learn macro-F1', () => {
    expect(m.macro_f1).toBeCloseTo(r.macro_f1, 14);
  });

  it('refuses a class index outside the matrix', () => {
    expect(() => confusionMatrix([0, 5], [0, 1], 2)).toThrow(/out of range/);
  });
});

describe('log-loss and Brier score', () => {
  const s = reference.scores;
  it('log-loss matches scikit-learn log_loss on 4 and on 2 classes (fixture of make-core-fixtures.py)', () => {
    for (const c of [s.multi, s.binary]) expect(logLoss(Float64Array.from(c.probabilities.flat()), c.labels.length, c.classes, c.labels)).toBeCloseTo(c.log_loss, 12);
  });

  it('Brier score on 2 classes is twice scikit-learn brier_score_loss, as the multi-class definition (Brier 1950) makes it', () => {
    const c = s.binary;
    expect(brierScore(Float64Array.from(c.probabilities.flat()), c.labels.length, 2, c.labels)).toBeCloseTo(2 * c.brier_binary, 12);
  });

  it('Brier score is 0 for certain right answers and 2 for certain wrong ones', () => {
    expect(brierScore(Float64Array.of(1, 0, 0, 1), 2, 2, [0, 1])).toBe(0);
    expect(brierScore(Float64Array.of(0, 1, 1, 0), 2, 2, [0, 1])).toBe(2);
  });
});
