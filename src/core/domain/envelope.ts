import { column, quantileSorted, sortedCopy } from '../describe.js';

export interface Envelope {
  tolerance: number;
  low: number[];
  high: number[];
}

/** The quantiles the envelope starts from: 0.1% and 99.9%, so a handful of outliers do not set it. */
export const ENVELOPE_LEVELS = { low: 0.001, high: 0.999 } as const;

/**
 * Per-feature operating envelope (common practice): [q_low - t R, q_high + t R] with
 * R = q_high - q_low, the training quantiles at ENVELOPE_LEVELS and t the tolerance.
 */
export function fitEnvelope(x: Float64Array, rows: number, cols: number, tolerance: number): Envelope {
  if (!(tolerance >= 0)) throw new RangeError(`envelope tolerance must be >= 0, got ${tolerance}`);
  const low: number[] = [];
  const high: number[] = [];
  for (let j = 0; j < cols; j++) {
    const sorted = sortedCopy(column(x, rows, cols, j));
    const qLo = quantileSorted(sorted, ENVELOPE_LEVELS.low);
    const qHi = quantileSorted(sorted, ENVELOPE_LEVELS.high);
    const widen = tolerance * (qHi - qLo);
    low.push(qLo - widen);
    high.push(qHi + widen);
  }
  return { tolerance, low, high };
}

/** Indices of the features of one row that lie outside the envelope (NaN counts as outside). */
export function featuresOutside(env: Envelope, x: ArrayLike<number>, offset = 0): number[] {
  const out: number[] = [];
  for (let j = 0; j < env.low.length; j++) {
    const v = x[offset + j] as number;
    if (!(v >= (env.low[j] as number) && v <= (env.high[j] as number))) out.push(j);
  }
  return out;
}
