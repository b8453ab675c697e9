/**
 * Softmax of logits / temperature for each row, written into out. The row maximum is
 * subtracted first so that exp never overflows (common practice); the result is unchanged
 * because softmax is invariant to adding a constant to every logit.
 */
export function softmaxRowsInto(logits: Float64Array, rows: number, classes: number, temperature: number, out: Float64Array): void {
  if (!(temperature > 0)) throw new RangeError(`temperature must be > 0, got ${temperature}`);
  const invT = 1 / temperature;
  for (let r = 0; r < rows; r++) {
    const off = r * classes;
    let max = -Infinity;
    for (let k = 0; k < classes; k++) {
      const z = (logits[off + k] as number) * invT;
      if (z > max) max = z;
    }
    let sum = 0;
    for (let k = 0; k < classes; k++) {
      const e = Math.exp((logits[off + k] as number) * invT - max);
      out[off + k] = e;
      sum += e;
    }
    const inv = 1 / sum;
    for (let k = 0; k < classes; k++) out[off + k] = (out[off + k] as number) * inv;
  }
}

export function softmax(logits: ArrayLike<number>, temperature = 1): Float64Array {
  const z = Float64Array.from(logits);
  const out = new Float64Array(z.length);
  softmaxRowsInto(z, 1, z.length, temperature, out);
  return out;
}

/** log sum_k exp(z_k), stable for any finite z (the max is factored out). */
export function logSumExp(z: ArrayLike<number>, start = 0, length = z.length - start, scale = 1): number {
  let max = -Infinity;
  for (let k = 0; k < length; k++) {
    const v = (z[start + k] as number) * scale;
    if (v > max) max = v;
  }
  if (max === -Infinity) return -Infinity;
  let sum = 0;
  for (let k = 0; k < length; k++) sum += Math.exp((z[start + k] as number) * scale - max);
  return max + Math.log(sum);
}

export interface TopTwo {
  /** Index of the largest probability (the first one on ties). */
  index: number;
  /** Largest minus second-largest probability; 1 when there is a single class. */
  margin: number;
  /** The largest probability (maximum softmax probability). */
  top: number;
}

export function topTwo(p: ArrayLike<number>, start = 0, length = p.length - start): TopTwo {
  let best = -Infinity;
  let second = -Infinity;
  let index = 0;
  for (let k = 0; k < length; k++) {
    const v = p[start + k] as number;
    if (v > best) {
      second = best;
      best = v;
      index = k;
    } else if (v > second) {
      second = v;
    }
  }
  return { index, top: best, margin: second === -Infinity ? best : best - second };
}
