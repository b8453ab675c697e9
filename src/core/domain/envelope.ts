import { column, quantileSorted, sortedCopy } from '../describe.js';

export interface Envelope {
  tolerance: number;
  low: number[];
  high: number[];
}

/** The quantiles the envelope starts from: 0.1% and 99.9%, so a handful of outliers do not set it. */
export const ENVELOPE_LEVELS = { low: 0.001, high: 0.999 } as const;

/** Per feature, the training quantiles at ENVELOPE_LEVELS: the range the envelope widens. */
export function quantileRange(x: Float64Array, rows: number, cols: number): { low: Float64Array; high: Float64Array } {
  const low = new Float64Array(cols);
  const high = new Float64Array(cols);
  for (let j = 0; j < cols; j++) {
    const sorted = sortedCopy(column(x, rows, cols, j));
    low[j] = quantileSorted(sorted, ENVELOPE_LEVELS.low);
    high[j] = quantileSorted(sorted, ENVELOPE_LEVELS.high);
  }
  return { low, high };
}

/**
 * Per-feature operating envelope (common practice): [q_low - t R, q_high + t R] with
 * R = q_high - q_low, the training quantiles at ENVELOPE_LEVELS and t the tolerance.
 */
export function fitEnvelope(x: Float64Array, rows: number, cols: number, tolerance: number): Envelope {
  if (!(tolerance >= 0)) throw new RangeError(`envelope tolerance must be >= 0, got ${tolerance}`);
  const range = quantileRange(x, rows, cols);
  return envelopeFromRange(range, tolerance);
}

export function envelopeFromRange(q: { low: ArrayLike<number>; high: ArrayLike<number> }, tolerance: number): Envelope {
  const low: number[] = [];
  const high: number[] = [];
  for (let j = 0; j < q.low.length; j++) {
    const qLo = q.low[j] as number;
    const qHi = q.high[j] as number;
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

/**
 * How far a row lies beyond the quantile range, in units of each feature's range R: the largest
 * (q_low - x) / R or (x - q_high) / R over the features, 0 when inside. Features constant in
 * training (R = 0) are left out: no tolerance can widen them.
 */
export function rangeExceedance(q: { low: ArrayLike<number>; high: ArrayLike<number> }, x: ArrayLike<number>, offset = 0): number {
  let worst = 0;
  for (let j = 0; j < q.low.length; j++) {
    const lo = q.low[j] as number;
    const hi = q.high[j] as number;
    const r = hi - lo;
    if (!(r > 0)) continue;
    const v = x[offset + j] as number;
    worst = Math.max(worst, (lo - v) / r, (v - hi) / r);
  }
  return worst;
}

/** Indices of the features of one row that lie outside the envelope (NaN counts as outside). */
export function featuresOutside(env: { low: readonly number[]; high: readonly number[] }, x: ArrayLike<number>, offset = 0): number[] {
  const out: number[] = [];
  for (let j = 0; j < env.low.length; j++) {
    const v = x[offset + j] as number;
    if (!(v >= (env.low[j] as number) && v <= (env.high[j] as number))) out.push(j);
  }
  return out;
}
