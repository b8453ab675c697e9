/**
 * Quantile of sorted values by linear interpolation between order statistics, Hyndman & Fan
 * (1996) definition 7: h = (n - 1) p, the default of R and numpy.
 */
export function quantileSorted(sorted: ArrayLike<number>, p: number): number {
  const n = sorted.length;
  if (n === 0) throw new RangeError('quantile of an empty sample');
  if (!(p >= 0 && p <= 1)) throw new RangeError(`quantile level must be in [0, 1], got ${p}`);
  const h = (n - 1) * p;
  const lo = Math.floor(h);
  const hi = Math.min(lo + 1, n - 1);
  const a = sorted[lo] as number;
  const b = sorted[hi] as number;
  return a + (h - lo) * (b - a);
}

export function sortedCopy(values: ArrayLike<number>): Float64Array {
  return Float64Array.from(values).sort();
}

/** Mean and population standard deviation, by Welford's update (stable for large offsets). */
export function meanAndStd(values: ArrayLike<number>): { mean: number; std: number } {
  let mean = 0;
  let m2 = 0;
  for (let i = 0; i < values.length; i++) {
    const x = values[i] as number;
    const d = x - mean;
    mean += d / (i + 1);
    m2 += d * (x - mean);
  }
  const n = values.length;
  return { mean: n > 0 ? mean : NaN, std: n > 0 ? Math.sqrt(m2 / n) : NaN };
}

/** Column j of a row-major rows x cols matrix. */
export function column(x: Float64Array, rows: number, cols: number, j: number): Float64Array {
  const out = new Float64Array(rows);
  for (let r = 0; r < rows; r++) out[r] = x[r * cols + j] as number;
  return out;
}

/**
 * Index of the bin that holds v, for bins (-inf, e0], (e0, e1], ..., (e_last, inf): the number of
 * edges strictly below v. Fitting and drift use this one function so their bins agree.
 */
export function binIndex(edges: ArrayLike<number>, v: number): number {
  let lo = 0;
  let hi = edges.length;
  while (lo < hi) {
    const mid = (lo + hi) >>> 1;
    if ((edges[mid] as number) < v) lo = mid + 1;
    else hi = mid;
  }
  return lo;
}
