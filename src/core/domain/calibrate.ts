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

/**
 * The largest pass rate that n calibration rows can promise one detector: the conformal
 * threshold at level p needs ceil((n + 1) p) <= n, so p <= n / (n + 1) (fewer than 1/(1 - p) - 1
 * rows cannot support p). A union of detectors can promise less (calibrateJoint).
 */
export function supportedLevel(n: number, target: number): number {
  return n <= 0 ? 0 : Math.min(target, n / (n + 1));
}

export interface JointCalibration {
  /** The level calibrated to: the target, or the most the rows can support for this union. */
  level: number;
  /** Every detector's threshold is its rank-th smallest calibration score. */
  rank: number;
  thresholds: number[];
  /** Per calibration row, whether it passes every detector at thresholds calibrated without it. */
  looPasses: boolean[];
}

/**
 * One flag, one budget: thresholds for a flag that is raised when any detector exceeds its own,
 * calibrated together so that a new row exchangeable with the n calibration rows passes all of
 * them with probability at least the level.
 *
 * Each detector's scores become ranks (1 + the rows scoring strictly lower: a conformal p-value
 * up to scale; Vovk et al. 2005; Bates et al. 2023, "Testing for outliers with conformal
 * p-values", Annals of Statistics), and a row's combined score c is its worst rank over the
 * detectors. Computed on the n rows and a new one together, c gives an exactly valid full
 * conformal p-value; the flag here is the per-detector form of that test. A new row is flagged
 * when its rank in some detector exceeds R, and then at most #{rows with c >= R} rows (their
 * ranks can grow by one when the new row joins) score at least as high as it does; so with
 * R = c_(k) + 1, k = ceil((n + 1) level), its p-value is at most 1 - level and the flag is raised
 * no more often than the full conformal test raises it. With one detector no rank can be
 * overtaken, and R = c_(k) is the split-conformal threshold itself. The price of deciding
 * detector by detector is at most about one row in n + 1 of extra passes per detector.
 * The most the rows support is #{c <= n - 1} / (n + 1) (n / (n + 1) for one detector): with
 * few rows and several detectors the level is lowered to it.
 */
export function calibrateJoint(scores: readonly ArrayLike<number>[], rows: number, target: number): JointCalibration {
  const sorted = scores.map((s) => Float64Array.from(s).sort());
  const worst = new Float64Array(rows).fill(1);
  sorted.forEach((sj, j) => {
    const s = scores[j] as ArrayLike<number>;
    for (let r = 0; r < rows; r++) worst[r] = Math.max(worst[r] as number, 1 + countBelow(sj, s[r] as number));
  });
  const slack = scores.length > 1 ? 1 : 0;
  const order = Float64Array.from(worst).sort();
  const within = countBelow(order, rows - slack + 1);
  const level = rows === 0 ? 0 : Math.min(target, within / (rows + 1));
  const k = Math.max(1, Math.ceil((rows + 1) * level));
  // With as few rows as detectors no level is supported (level 0): the thresholds are then the
  // largest calibration scores, the least a flag can say.
  const rank = rows === 0 ? 0 : Math.min(rows, (order[k - 1] as number) + slack);
  return { level, rank, thresholds: sorted.map((sj) => (rank > 0 ? (sj[rank - 1] as number) : Infinity)), looPasses: leaveOneOutJoint(scores, sorted, rows, target, slack) };
}

/** Up to this many rows the leave-one-out check recalibrates exactly, in O(n^2) per detector. */
export const EXACT_LOO_ROWS = 6000;

/**
 * For each calibration row, whether it passes thresholds calibrated by calibrateJoint on the other
 * n - 1 rows: their ranks among themselves, their own supported level and rank. Exact up to
 * EXACT_LOO_ROWS rows; above that each row's own rank is taken out of the combined scores but the
 * others' ranks are left as they are (each could fall by one), which errs by at most one rank in
 * several thousand.
 */
function leaveOneOutJoint(scores: readonly ArrayLike<number>[], sorted: readonly Float64Array[], n: number, target: number, slack: number): boolean[] {
  if (n < 2) return Array.from({ length: n }, () => true);
  const J = scores.length;
  const ranks = sorted.map((sj, j) => Int32Array.from({ length: n }, (_, r) => 1 + countBelow(sj, (scores[j] as ArrayLike<number>)[r] as number)));
  const worst = Int32Array.from({ length: n }, (_, r) => Math.max(1, ...ranks.map((rj) => rj[r] as number)));
  const passWith = (i: number, rank: number): boolean =>
    sorted.every((sj, j) => {
      const v = (scores[j] as ArrayLike<number>)[i] as number;
      // The rank-th smallest of the others: one further along when row i is among the first rank.
      const t = v > (sj[rank - 1] as number) ? (sj[rank - 1] as number) : (sj[rank] as number);
      return v <= t;
    });
  const counts = new Int32Array(n + 2);
  const rankWithout = (others: (l: number) => number): number => {
    counts.fill(0);
    for (let l = 0; l < n; l++) counts[others(l)] = (counts[others(l)] as number) + 1;
    // n - 1 rows: level, k and rank as calibrateJoint computes them on those rows.
    let within = 0;
    for (let c = 1; c <= n - 1 - slack; c++) within += counts[c] as number;
    const level = Math.min(target, within / n);
    const k = Math.max(1, Math.ceil(n * level));
    let seen = 0;
    for (let c = 1; c <= n; c++) {
      seen += counts[c] as number;
      if (seen >= k) return Math.min(n - 1, c + slack);
    }
    return n - 1;
  };
  if (n > EXACT_LOO_ROWS) {
    return Array.from({ length: n }, (_, i) => passWith(i, rankWithout((l) => (l === i ? 0 : (worst[l] as number)))));
  }
  const without = new Int32Array(n);
  return Array.from({ length: n }, (_, i) => {
    for (let l = 0; l < n; l++) {
      if (l === i) {
        without[l] = 0;
        continue;
      }
      let w = 1;
      for (let j = 0; j < J; j++) {
        const s = scores[j] as ArrayLike<number>;
        // Without row i, row l's rank drops by one where row i scored strictly below it.
        const r = ((ranks[j] as Int32Array)[l] as number) - (((s[i] as number) < (s[l] as number)) ? 1 : 0);
        if (r > w) w = r;
      }
      without[l] = w;
    }
    return passWith(i, rankWithout((l) => without[l] as number));
  });
}

/** How many values of an ascending array are strictly below v (a lower-bound binary search). */
function countBelow(sorted: ArrayLike<number>, v: number): number {
  let lo = 0;
  let hi = sorted.length;
  while (lo < hi) {
    const mid = (lo + hi) >>> 1;
    if ((sorted[mid] as number) < v) lo = mid + 1;
    else hi = mid;
  }
  return lo;
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
