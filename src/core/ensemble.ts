import { softmaxRowsInto } from './softmax.js';

// An ensemble of networks trained on different folds of the same rows (deep ensembles,
// Lakshminarayanan et al. 2017, NeurIPS): it answers with the mean of its members' probabilities,
// and the members' disagreement says where they extrapolate differently.

/**
 * Each member's softmax(logits / temperature) into memberProbs[m], and their mean into mean.
 * With one member the mean is that member's probabilities, bit for bit.
 */
export function ensembleProbabilitiesInto(
  logits: readonly ArrayLike<number>[],
  rows: number,
  classes: number,
  temperature: number,
  memberProbs: Float64Array[],
  mean: Float64Array,
): void {
  const members = logits.length;
  logits.forEach((z, m) => softmaxRowsInto(z as Float64Array, rows, classes, temperature, memberProbs[m] as Float64Array));
  const n = rows * classes;
  if (members === 1) {
    mean.set((memberProbs[0] as Float64Array).subarray(0, n));
    return;
  }
  const inv = 1 / members;
  for (let i = 0; i < n; i++) {
    let s = 0;
    for (let m = 0; m < members; m++) s += (memberProbs[m] as Float64Array)[i] as number;
    mean[i] = s * inv;
  }
}

/**
 * The members' disagreement on each row: the mean Kullback–Leibler divergence of each member's
 * distribution from the ensemble mean, (1/M) sum_m KL(p_m || p̄). It equals the entropy of the
 * mean minus the mean entropy of the members (the mutual information between the answer and the
 * member), 0 when all members agree and at most log M.
 */
export function disagreementScores(memberProbs: readonly ArrayLike<number>[], mean: ArrayLike<number>, rows: number, classes: number): Float64Array {
  const members = memberProbs.length;
  const out = new Float64Array(rows);
  for (let r = 0; r < rows; r++) {
    const off = r * classes;
    let s = 0;
    for (let m = 0; m < members; m++) {
      const p = memberProbs[m] as ArrayLike<number>;
      for (let k = 0; k < classes; k++) {
        const v = p[off + k] as number;
        // 0 log 0 = 0; p̄_k >= v / M > 0 wherever v > 0.
        if (v > 0) s += v * Math.log(v / (mean[off + k] as number));
      }
    }
    // Rounding can leave -1e-17 where every member agrees.
    out[r] = Math.max(0, s / members);
  }
  return out;
}

const scratch = new DataView(new ArrayBuffer(8));

/**
 * The member whose own detectors check a vector: FNV-1a (32-bit) of the vector's float64 bytes,
 * little-endian, modulo the number of members. Every member's thresholds were calibrated on the
 * rows its network never saw, so a new vector checked by one member is checked exactly as those
 * rows were; the hash makes the choice the same every time for the same vector, and spreads
 * vectors evenly over the members.
 */
export function memberForRow(x: ArrayLike<number>, offset: number, length: number, members: number): number {
  if (members <= 1) return 0;
  let h = 0x811c9dc5;
  for (let j = 0; j < length; j++) {
    scratch.setFloat64(0, x[offset + j] as number, true);
    for (let b = 0; b < 8; b++) h = Math.imul(h ^ scratch.getUint8(b), 0x01000193);
  }
  return (h >>> 0) % members;
}
