import { describe, expect, it } from 'vitest';
import { createRng } from '../../src/core/rng.js';
import { rowsOfFold, stratifiedFolds, stratifiedSplit, takeRows } from '../../src/core/split.js';

describe('stratified split', () => {
  const labels = [...new Array(60).fill(0), ...new Array(30).fill(1), ...new Array(10).fill(2)];

  it('holds out the same share of every class', () => {
    const s = stratifiedSplit(labels, 3, 0.2, createRng(1));
    const count = (idx: number[], k: number): number => idx.filter((i) => labels[i] === k).length;
    expect([count(s.validation, 0), count(s.validation, 1), count(s.validation, 2)]).toEqual([12, 6, 2]);
    expect(s.train.length + s.validation.length).toBe(100);
    expect(new Set([...s.train, ...s.validation]).size).toBe(100);
  });

  it('is the same for the same seed and different for another', () => {
    expect(stratifiedSplit(labels, 3, 0.2, createRng(9))).toEqual(stratifiedSplit(labels, 3, 0.2, createRng(9)));
    expect(stratifiedSplit(labels, 3, 0.2, createRng(9)).validation).not.toEqual(stratifiedSplit(labels, 3, 0.2, createRng(10)).validation);
  });

  it('keeps at least one row of a small class on each side', () => {
    const s = stratifiedSplit([0, 0, 0, 0, 0, 0, 0, 0, 1, 1], 2, 0.1, createRng(3));
    expect(s.validation.filter((i) => i >= 8)).toHaveLength(1);
    expect(s.train.filter((i) => i >= 8)).toHaveLength(1);
  });

  it('trains on a class with a single row rather than holding it out', () => {
    const s = stratifiedSplit([0, 0, 0, 0, 1], 2, 0.5, createRng(1));
    expect(s.train).toContain(4);
    expect(s.validation).not.toContain(4);
  });

  it('holds out nothing when the fraction is 0', () => {
    expect(stratifiedSplit([0, 0, 1, 1], 2, 0, createRng(1))).toEqual({ train: [0, 1, 2, 3], validation: [] });
  });

  it('takes the rows of a row-major matrix', () => {
    expect(Array.from(takeRows(Float64Array.of(1, 2, 3, 4, 5, 6), 2, [2, 0]))).toEqual([5, 6, 1, 2]);
  });
});

describe('stratified folds', () => {
  const labels = [...new Array(61).fill(0), ...new Array(33).fill(1), ...new Array(7).fill(2)];

  it('deal every class over the folds in proportion, and the folds differ in size by at most one', () => {
    const fold = stratifiedFolds(labels, 3, 5, createRng(4));
    for (let k = 0; k < 3; k++) {
      const per = [0, 1, 2, 3, 4].map((f) => labels.filter((l, i) => l === k && fold[i] === f).length);
      expect(Math.max(...per) - Math.min(...per)).toBeLessThanOrEqual(1);
      expect(per.reduce((a, b) => a + b, 0)).toBe(labels.filter((l) => l === k).length);
    }
    const sizes = [0, 1, 2, 3, 4].map((f) => rowsOfFold(fold, f).length);
    expect(Math.max(...sizes) - Math.min(...sizes)).toBeLessThanOrEqual(1);
    expect(rowsOfFold(fold, 2).length + rowsOfFold(fold, 2, true).length).toBe(labels.length);
  });

  it('are the same for the same seed and different for another', () => {
    expect(stratifiedFolds(labels, 3, 5, createRng(9))).toEqual(stratifiedFolds(labels, 3, 5, createRng(9)));
    expect(stratifiedFolds(labels, 3, 5, createRng(9))).not.toEqual(stratifiedFolds(labels, 3, 5, createRng(10)));
  });

  it('refuse fewer than two folds, or more folds than rows', () => {
    expect(() => stratifiedFolds(labels, 3, 1, createRng(1))).toThrow(/folds must be an integer >= 2/);
    expect(() => stratifiedFolds([0, 1, 0], 2, 4, createRng(1))).toThrow(/4 folds need at least 4 rows/);
  });
});
