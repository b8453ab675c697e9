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
    const range = qHi - qLo;
    const widen = tolerance * range;
    const [lo, hi] = roundOutward(qLo - widen, qHi + widen, range);
    low.push(lo);
    high.push(hi);
  }
  return { tolerance, low, high };
}

/**
 * Rounds the bounds outwards to 5 significant digits of the range, so that a person reads
 * 2.025 rather than 2.0250000000000004; the envelope only grows (by under 0.01% of R), apart from
 * the float noise beyond 12 significant digits that is dropped first.
 * An integer divided by a power of ten is the double nearest that decimal, which prints short.
 */
export function roundOutward(low: number, high: number, range: number): [number, number] {
  if (!(range > 0) || !Number.isFinite(range)) return [low, high];
  const digits = 4 - Math.floor(Math.log10(range));
  // toPrecision(12) first drops float noise, so that 9880.000000000001 does not floor a step down.
  const clean = (v: number): number => Number(v.toPrecision(12));
  if (digits <= 0) {
    const step = 10 ** -digits;
    return [Math.floor(clean(low / step)) * step, Math.ceil(clean(high / step)) * step];
  }
  const scale = 10 ** digits;
  return [Math.floor(clean(low * scale)) / scale, Math.ceil(clean(high * scale)) / scale];
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
