import { type Rng, shuffleInPlace } from './rng.js';

export interface Split {
  train: number[];
  validation: number[];
}

/**
 * Stratified split: each class gives round(fraction * its count) rows to validation (at least one
 * and at most all but one when it has two rows or more; none when it has one), chosen by a seeded
 * shuffle.
 * Both index lists come back in ascending order so that the split does not reorder the data.
 */
export function stratifiedSplit(labels: ArrayLike<number>, classes: number, fraction: number, rng: Rng): Split {
  if (!(fraction >= 0 && fraction < 1)) throw new RangeError(`validation fraction must be in [0, 1), got ${fraction}`);
  const byClass: number[][] = Array.from({ length: classes }, () => []);
  for (let i = 0; i < labels.length; i++) byClass[labels[i] as number]?.push(i);
  const train: number[] = [];
  const validation: number[] = [];
  for (const members of byClass) {
    shuffleInPlace(members, rng);
    // A class with one row trains; with two or more, each side gets at least one.
    let take = members.length < 2 ? 0 : Math.round(fraction * members.length);
    if (fraction > 0 && members.length >= 2) take = Math.min(Math.max(take, 1), members.length - 1);
    validation.push(...members.slice(0, take));
    train.push(...members.slice(take));
  }
  return { train: train.sort((a, b) => a - b), validation: validation.sort((a, b) => a - b) };
}

/** The rows of a row-major matrix at the given indices, in that order. */
export function takeRows(x: Float64Array, cols: number, indices: readonly number[]): Float64Array {
  const out = new Float64Array(indices.length * cols);
  indices.forEach((row, i) => out.set(x.subarray(row * cols, row * cols + cols), i * cols));
  return out;
}

export function take(values: ArrayLike<number>, indices: readonly number[]): Int32Array {
  return Int32Array.from(indices, (i) => values[i] as number);
}

/**
 * Stratified K-fold assignment: each class is shuffled with the seeded generator and dealt to the
 * folds in turn, starting where the previous class stopped, so that every fold holds each class in
 * proportion (counts differ by at most one) and the fold sizes differ by at most one. Returns the
 * fold of each row.
 */
export function stratifiedFolds(labels: ArrayLike<number>, classes: number, folds: number, rng: Rng): Int32Array {
  if (!Number.isInteger(folds) || folds < 2) throw new RangeError(`folds must be an integer >= 2, got ${folds}`);
  if (labels.length < folds) throw new RangeError(`${folds} folds need at least ${folds} rows, got ${labels.length}`);
  const byClass: number[][] = Array.from({ length: classes }, () => []);
  for (let i = 0; i < labels.length; i++) byClass[labels[i] as number]?.push(i);
  const fold = new Int32Array(labels.length);
  let next = 0;
  for (const members of byClass) {
    shuffleInPlace(members, rng);
    for (const row of members) {
      fold[row] = next;
      next = (next + 1) % folds;
    }
  }
  return fold;
}

/** The indices i with fold[i] === k (or !== k when `except`), in ascending order. */
export function rowsOfFold(fold: ArrayLike<number>, k: number, except = false): number[] {
  const out: number[] = [];
  for (let i = 0; i < fold.length; i++) if ((fold[i] === k) !== except) out.push(i);
  return out;
}
