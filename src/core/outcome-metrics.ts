import { brierScore, classificationMetrics, logLoss } from './metrics.js';
import { fisherExactTwoSided } from './stats/exact-tests.js';
import { wilsonInterval } from './stats/proportion.js';

/** Labelled answers as plain arrays: one entry per answer whose outcome is known. */
export interface LabelledAnswers {
  classes: number;
  /** Index of the class the part turned out to be. */
  actual: ArrayLike<number>;
  /** Index of the class the model answered. */
  predicted: ArrayLike<number>;
  /** rows x classes, the answered probabilities. */
  probabilities: ArrayLike<number>;
  margin: ArrayLike<number>;
  inDomain: ArrayLike<boolean>;
  review: ArrayLike<boolean>;
}

export interface Share {
  rows: number;
  /** Share of the rows answered right; null without rows. */
  accuracy: number | null;
}

export interface ReliabilityBin {
  low: number;
  high: number;
  rows: number;
  /** Mean top probability of the rows in the bin. */
  confidence: number | null;
  accuracy: number | null;
}

export interface OutcomeMetrics {
  labelled: number;
  accuracy: { value: number | null; ci_low: number | null; ci_high: number | null };
  classes: Array<{ precision: number | null; recall: number | null; f1: number | null; rows: number }>;
  /** counts[actual][predicted]. */
  confusion: number[][];
  log_loss: number | null;
  brier: number | null;
  ece: { value: number | null; bins: ReliabilityBin[] };
  by_domain: { in_domain: Share; out_of_domain: Share; p_value: number | null };
  by_margin: Array<Share & { low: number; high: number }>;
  review: Share;
  not_review: Share;
}

/** Margin bands of the report (the issue's): [0, 0.2), [0.2, 0.5), [0.5, 0.8), [0.8, 1]. */
export const MARGIN_BANDS: ReadonlyArray<readonly [number, number]> = [
  [0, 0.2],
  [0.2, 0.5],
  [0.5, 0.8],
  [0.8, 1],
];

/** Equal-width bins of the top probability in the reliability diagram (common practice: 10). */
export const RELIABILITY_BINS = 10;

/**
 * Reliability of the top probability (Guo et al. 2017, ICML, section 2 and eq. 3): answers in
 * `bins` equal-width bins of [0, 1] by their top probability, each bin's mean confidence and
 * accuracy, and ECE = sum_m |B_m|/n |acc(B_m) - conf(B_m)|. Bin m holds [m/M, (m+1)/M), the last
 * bin 1 too, as scikit-learn's calibration_curve bins them.
 */
export function reliability(confidence: ArrayLike<number>, correct: ArrayLike<boolean>, bins = RELIABILITY_BINS): { value: number | null; bins: ReliabilityBin[] } {
  const n = confidence.length;
  const rows = new Float64Array(bins);
  const conf = new Float64Array(bins);
  const hits = new Float64Array(bins);
  for (let r = 0; r < n; r++) {
    const c = confidence[r] as number;
    const m = Math.min(bins - 1, Math.max(0, Math.floor(c * bins)));
    rows[m] = (rows[m] as number) + 1;
    conf[m] = (conf[m] as number) + c;
    if (correct[r]) hits[m] = (hits[m] as number) + 1;
  }
  let ece = 0;
  const out: ReliabilityBin[] = [];
  for (let m = 0; m < bins; m++) {
    const k = rows[m] as number;
    if (k > 0) ece += Math.abs((hits[m] as number) - (conf[m] as number)) / n;
    out.push({ low: m / bins, high: (m + 1) / bins, rows: k, confidence: k > 0 ? (conf[m] as number) / k : null, accuracy: k > 0 ? (hits[m] as number) / k : null });
  }
  return { value: n > 0 ? ece : null, bins: out };
}

function share(right: number, rows: number): Share {
  return { rows, accuracy: rows > 0 ? right / rows : null };
}

/**
 * Everything the outcomes report says of labelled answers: accuracy with its Wilson 95% interval
 * (Newcombe 1998, method 3), per-class precision, recall and F1 (zero_division 0, as
 * scikit-learn), the confusion matrix, log-loss and multi-class Brier score, the reliability bins
 * and ECE, accuracy in and out of domain with Fisher's exact test between them, by margin band
 * and by the review flag.
 */
export function summariseOutcomes(a: LabelledAnswers): OutcomeMetrics {
  const n = a.actual.length;
  const K = a.classes;
  const m = classificationMetrics(a.actual, a.predicted, K);
  const correct: boolean[] = new Array<boolean>(n);
  const top = new Float64Array(n);
  let right = 0;
  for (let r = 0; r < n; r++) {
    correct[r] = a.actual[r] === a.predicted[r];
    if (correct[r]) right++;
    let t = 0;
    for (let k = 0; k < K; k++) t = Math.max(t, a.probabilities[r * K + k] as number);
    top[r] = t;
  }
  const ci = wilsonInterval(right, n);
  const tally = (pick: (r: number) => boolean): [number, number] => {
    let rows = 0;
    let ok = 0;
    for (let r = 0; r < n; r++) {
      if (!pick(r)) continue;
      rows++;
      if (correct[r]) ok++;
    }
    return [ok, rows];
  };
  const [inRight, inRows] = tally((r) => a.inDomain[r] === true);
  const [outRight, outRows] = tally((r) => a.inDomain[r] !== true);
  const [revRight, revRows] = tally((r) => a.review[r] === true);
  const bands = MARGIN_BANDS.map(([low, high]) => {
    const last = high >= 1;
    const [ok, rows] = tally((r) => {
      const v = a.margin[r] as number;
      return v >= low && (last ? v <= high : v < high);
    });
    return { low, high, ...share(ok, rows) };
  });
  return {
    labelled: n,
    accuracy: { value: n > 0 ? right / n : null, ci_low: n > 0 ? ci.low : null, ci_high: n > 0 ? ci.high : null },
    classes: m.per_class.map((c, k) => {
      // Without answers of a class its precision is undefined, without rows of it its recall:
      // null, where scikit-learn's zero_division convention would print 0.
      const answered = m.confusion.reduce((s, row) => s + (row[k] ?? 0), 0);
      const precision = answered > 0 ? c.precision : null;
      const recall = c.support > 0 ? c.recall : null;
      return { precision, recall, f1: precision === null || recall === null ? null : c.f1, rows: c.support };
    }),
    confusion: m.confusion,
    log_loss: n > 0 ? logLoss(a.probabilities, n, K, a.actual) : null,
    brier: n > 0 ? brierScore(a.probabilities, n, K, a.actual) : null,
    ece: reliability(top, correct),
    by_domain: {
      in_domain: share(inRight, inRows),
      out_of_domain: share(outRight, outRows),
      p_value: inRows > 0 && outRows > 0 ? fisherExactTwoSided(inRight, inRows - inRight, outRight, outRows - outRight) : null,
    },
    by_margin: bands,
    review: share(revRight, revRows),
    not_review: share(right - revRight, n - revRows),
  };
}
