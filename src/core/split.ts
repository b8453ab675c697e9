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
