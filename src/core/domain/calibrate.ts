/**
 * The split-conformal threshold for a pass rate p: the ceil((n + 1) p)-th smallest of n held-out
 * scores (Vovk et al. 2005; Lei et al. 2018, "Distribution-free predictive inference for
 * regression", JASA, section 2.2). For a new row exchangeable with them, P(score <= threshold) >= p.
 * Returns the largest score when (n + 1) p > n.
 */
export function conformalThreshold(scores: ArrayLike<number>, level: number): number {
  return conformalThresholdSorted(Float64Array.from(scores).sort(), level);
}

export function conformalThresholdSorted(sorted: ArrayLike<number>, level: number): number {
  const n = sorted.length;
  if (n === 0) return Infinity;
  const k = Math.min(n, Math.ceil((n + 1) * level));
  return sorted[Math.max(0, k - 1)] as number;
}

export interface CompositeCalibration {
  /** Per-detector level used for every calibrated detector. */
  level: number;
  thresholds: number[];
  /** Share of the held-out rows that pass every detector with these thresholds. */
  passRate: number;
}

/**
 * Thresholds for a composite flag that is raised when any detector exceeds its threshold. All
 * calibrated detectors share one level q, the smallest q (by bisection over [target, 1]) at which
 * the held-out pass rate of the composite, including detectors with fixed outcomes (`alsoPass`,
 * e.g. the envelope), reaches the target. When even q = 1 cannot reach it (the fixed detectors
 * alone fail too many rows), q = 1 is used and the shortfall shows in passRate.
 */
export function calibrateComposite(scores: Float64Array[], rows: number, target: number, alsoPass: (row: number) => boolean = () => true): CompositeCalibration {
  const sorted = scores.map((s) => Float64Array.from(s).sort());
  const rate = (q: number): { thresholds: number[]; passRate: number } => {
    const thresholds = sorted.map((s) => conformalThresholdSorted(s, q));
    let pass = 0;
    for (let r = 0; r < rows; r++) if (alsoPass(r) && scores.every((s, d) => (s[r] as number) <= (thresholds[d] as number))) pass++;
    return { thresholds, passRate: rows > 0 ? pass / rows : 1 };
  };
  let lo = target;
  let hi = 1;
  let best = { level: 1, ...rate(1) };
  const first = rate(lo);
  if (first.passRate >= target) return { level: lo, ...first };
  for (let iter = 0; iter < 40; iter++) {
    const mid = (lo + hi) / 2;
    const r = rate(mid);
    if (r.passRate >= target) {
      best = { level: mid, ...r };
      hi = mid;
    } else lo = mid;
  }
  return best;
}

/**
 * For each row, whether it passes the threshold that conformalThreshold would calibrate at
 * `level` on the other n - 1 rows: the leave-one-out check that makes a measured pass rate honest
 * (a row never helps set its own threshold). With k = min(n - 1, ceil(n level)), the threshold
 * without row i is the k-th smallest of the others, so row i passes exactly when its score is
 * at most the k-th smallest of all n.
 */
export function leaveOneOutPasses(scores: ArrayLike<number>, level: number): boolean[] {
  const n = scores.length;
  if (n < 2) return Array.from({ length: n }, () => true);
  const sorted = Float64Array.from(scores).sort();
  const k = Math.min(n - 1, Math.ceil(n * level));
  const limit = sorted[k - 1] as number;
  return Array.from(scores, (v) => v <= limit);
}
