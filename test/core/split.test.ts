import { describe, expect, it } from 'vitest';
import { createRng } from '../../src/core/rng.js';
import { stratifiedSplit, takeRows } from '../../src/core/split.js';

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
