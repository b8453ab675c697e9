/**
 * A scalar function of the members' outputs that an attribution explains, with its derivative.
 * outputs[m] holds member m's outputs, rows x classes; `row` picks one row of them.
 */
export interface PathTarget {
  readonly classes: number;
  value(outputs: readonly Float64Array[], row: number): number;
  /** dF / d outputs[m][row, k], written into cotangent[m] at row `outRow`. */
  cotangent(outputs: readonly Float64Array[], row: number, cotangent: Float64Array[], outRow: number): void;
}

/**
 * exp(z_k / T - max_k z_k / T) of one row of one member's logits into out[at..], the softmax
 * before its division; returns the shift and the sum the caller divides by.
 */
function expsInto(z: Float64Array, off: number, classes: number, invT: number, out: Float64Array, at: number): { zmax: number; sum: number } {
  let zmax = -Infinity;
  for (let k = 0; k < classes; k++) if ((z[off + k] as number) > zmax) zmax = z[off + k] as number;
  zmax *= invT;
  let sum = 0;
  for (let k = 0; k < classes; k++) {
    const e = Math.exp((z[off + k] as number) * invT - zmax);
    out[at + k] = e;
    sum += e;
  }
  return { zmax, sum };
}

/**
 * log p_c of the served answer: p = (1/M) sum_m softmax(z_m / T), the mean of the members'
 * calibrated probabilities (src/core/ensemble.ts). Computed in logs throughout, so that a class
 * whose probability underflows at the baseline still has a finite log:
 *   l_m = z_mc / T - logsumexp(z_m / T),   F = logsumexp_m(l_m) - log M,
 *   dF/dz_mk = w_m (1[k = c] - p_mk) / T,  w_m = exp(l_m - logsumexp(l)) = p_mc / sum_m' p_m'c.
 */
export function servedLogProbability(classIndex: number, classes: number, temperature: number): PathTarget {
  if (!(temperature > 0)) throw new RangeError(`temperature must be > 0, got ${temperature}`);
  const invT = 1 / temperature;
  let logP = new Float64Array(0);
  let probs = new Float64Array(0);
  /** l_m for every member into logP, each member's softmax into probs; returns logsumexp_m(l_m). */
  const memberLogs = (outputs: readonly Float64Array[], row: number): number => {
    const M = outputs.length;
    if (logP.length < M) {
      logP = new Float64Array(M);
      probs = new Float64Array(M * classes);
    }
    const off = row * classes;
    let max = -Infinity;
    for (let m = 0; m < M; m++) {
      const z = outputs[m] as Float64Array;
      const { zmax, sum } = expsInto(z, off, classes, invT, probs, m * classes);
      for (let k = 0; k < classes; k++) probs[m * classes + k] = (probs[m * classes + k] as number) / sum;
      const l = (z[off + classIndex] as number) * invT - zmax - Math.log(sum);
      logP[m] = l;
      if (l > max) max = l;
    }
    let s = 0;
    for (let m = 0; m < M; m++) s += Math.exp((logP[m] as number) - max);
    return max + Math.log(s);
  };
  return {
    classes,
    value(outputs, row) {
      // In probabilities where p_c is not vanishingly small (one log instead of one per member).
      const M = outputs.length;
      const off = row * classes;
      let total = 0;
      for (let m = 0; m < M; m++) {
        const z = outputs[m] as Float64Array;
        let zmax = -Infinity;
        for (let k = 0; k < classes; k++) if ((z[off + k] as number) > zmax) zmax = z[off + k] as number;
        let sum = 0;
        for (let k = 0; k < classes; k++) sum += Math.exp(((z[off + k] as number) - zmax) * invT);
        total += Math.exp(((z[off + classIndex] as number) - zmax) * invT) / sum;
      }
      if (total > 1e-280) return Math.log(total / M);
      return memberLogs(outputs, row) - Math.log(M);
    },
    cotangent(outputs, row, cotangent, outRow) {
      const M = outputs.length;
      const out = outRow * classes;
      const off = row * classes;
      if (probs.length < M * classes) {
        logP = new Float64Array(M);
        probs = new Float64Array(M * classes);
      }
      // The weights w_m = p_mc / sum_m' p_m'c straight from the probabilities, without logs; only
      // where every member's p_c underflows (beyond e^-650) are they taken in logs instead.
      let total = 0;
      for (let m = 0; m < M; m++) {
        const { sum } = expsInto(outputs[m] as Float64Array, off, classes, invT, probs, m * classes);
        const inv = 1 / sum;
        for (let k = 0; k < classes; k++) probs[m * classes + k] = (probs[m * classes + k] as number) * inv;
        total += probs[m * classes + classIndex] as number;
      }
      const logs = total < 1e-280;
      const lse = logs ? memberLogs(outputs, row) : 0;
      for (let m = 0; m < M; m++) {
        const w = (logs ? Math.exp((logP[m] as number) - lse) : (probs[m * classes + classIndex] as number) / total) * invT;
        const c = cotangent[m] as Float64Array;
        for (let k = 0; k < classes; k++) c[out + k] = w * ((k === classIndex ? 1 : 0) - (probs[m * classes + k] as number));
      }
    },
  };
}

/** The mean over members of z_c - z_k, the logit difference of two classes: linear in the outputs. */
export function logitDifference(classIndex: number, otherIndex: number, classes: number): PathTarget {
  return {
    classes,
    value(outputs, row) {
      let s = 0;
      for (const z of outputs) s += (z[row * classes + classIndex] as number) - (z[row * classes + otherIndex] as number);
      return s / outputs.length;
    },
    cotangent(outputs, _row, cotangent, outRow) {
      const inv = 1 / outputs.length;
      for (const c of cotangent) {
        c.fill(0, outRow * classes, outRow * classes + classes);
        c[outRow * classes + classIndex] = (c[outRow * classes + classIndex] as number) + inv;
        c[outRow * classes + otherIndex] = (c[outRow * classes + otherIndex] as number) - inv;
      }
    },
  };
}
