import { topTwo } from './softmax.js';

export interface ClassMetrics {
  precision: number;
  recall: number;
  f1: number;
  support: number;
}

export interface ClassificationMetrics {
  accuracy: number;
  macro_f1: number;
  per_class: ClassMetrics[];
  /** confusion[actual][predicted] counts. */
  confusion: number[][];
}

export function confusionMatrix(actual: ArrayLike<number>, predicted: ArrayLike<number>, classes: number): number[][] {
  if (actual.length !== predicted.length) throw new RangeError('actual and predicted differ in length');
  const m = Array.from({ length: classes }, () => new Array<number>(classes).fill(0));
  for (let i = 0; i < actual.length; i++) {
    const row = m[actual[i] as number];
    if (!row) throw new RangeError(`class index ${actual[i]} out of range`);
    row[predicted[i] as number] = (row[predicted[i] as number] ?? 0) + 1;
  }
  return m;
}

/**
 * Accuracy, per-class precision/recall/F1 and their unweighted mean F1. A class with no
 * predictions (or no support) gets precision (recall) 0, the zero_division=0 convention of
 * scikit-learn's classification_report.
 */
export function classificationMetrics(actual: ArrayLike<number>, predicted: ArrayLike<number>, classes: number): ClassificationMetrics {
  const confusion = confusionMatrix(actual, predicted, classes);
  let correct = 0;
  const perClass: ClassMetrics[] = [];
  for (let k = 0; k < classes; k++) {
    const tp = confusion[k]?.[k] ?? 0;
    correct += tp;
    let predictedK = 0;
    let actualK = 0;
    for (let j = 0; j < classes; j++) {
      predictedK += confusion[j]?.[k] ?? 0;
      actualK += confusion[k]?.[j] ?? 0;
    }
    const precision = predictedK > 0 ? tp / predictedK : 0;
    const recall = actualK > 0 ? tp / actualK : 0;
    const f1 = precision + recall > 0 ? (2 * precision * recall) / (precision + recall) : 0;
    perClass.push({ precision, recall, f1, support: actualK });
  }
  const n = actual.length;
  return {
    accuracy: n > 0 ? correct / n : NaN,
    macro_f1: perClass.reduce((s, c) => s + c.f1, 0) / classes,
    per_class: perClass,
    confusion,
  };
}

/** Index of the largest value in each row of a rows x classes matrix. */
export function argmaxRows(p: Float64Array, rows: number, classes: number): Int32Array {
  const out = new Int32Array(rows);
  for (let r = 0; r < rows; r++) out[r] = topTwo(p, r * classes, classes).index;
  return out;
}

/**
 * Expected calibration error (Naeini et al. 2015; Guo et al. 2017, eq. 3): rows are put in
 * `bins` equal-width bins of (0, 1] by their top probability; ECE = sum_m |B_m|/n |acc(B_m) - conf(B_m)|.
 * Bin m holds confidences in ((m-1)/M, m/M].
 */
export function expectedCalibrationError(
  probabilities: Float64Array,
  rows: number,
  classes: number,
  labels: ArrayLike<number>,
  bins = 15,
): number {
  const count = new Float64Array(bins);
  const conf = new Float64Array(bins);
  const hits = new Float64Array(bins);
  for (let r = 0; r < rows; r++) {
    const t = topTwo(probabilities, r * classes, classes);
    const m = Math.min(bins - 1, Math.max(0, Math.ceil(t.top * bins) - 1));
    count[m] = (count[m] as number) + 1;
    conf[m] = (conf[m] as number) + t.top;
    if (t.index === labels[r]) hits[m] = (hits[m] as number) + 1;
  }
  let ece = 0;
  for (let m = 0; m < bins; m++) {
    const c = count[m] as number;
    if (c > 0) ece += Math.abs((hits[m] as number) - (conf[m] as number)) / rows;
  }
  return ece;
}

/** Smallest probability a log-loss takes the log of: float64 machine epsilon, as scikit-learn's log_loss clips. */
const LOG_LOSS_FLOOR = 2.220446049250313e-16;

/** Mean negative log-probability of each row's own class (cross-entropy, "log-loss"). */
export function logLoss(probabilities: ArrayLike<number>, rows: number, classes: number, labels: ArrayLike<number>): number {
  let s = 0;
  for (let r = 0; r < rows; r++) s -= Math.log(Math.min(1 - LOG_LOSS_FLOOR, Math.max(LOG_LOSS_FLOOR, probabilities[r * classes + (labels[r] as number)] as number)));
  return s / rows;
}

/**
 * Brier score in its original multi-class form (Brier 1950, Monthly Weather Review 78):
 * mean over rows of sum_k (p_k - o_k)^2, o the one-hot label; 0 is perfect, 2 the worst.
 */
export function brierScore(probabilities: ArrayLike<number>, rows: number, classes: number, labels: ArrayLike<number>): number {
  let s = 0;
  for (let r = 0; r < rows; r++) {
    for (let k = 0; k < classes; k++) {
      const e = (probabilities[r * classes + k] as number) - (k === labels[r] ? 1 : 0);
      s += e * e;
    }
  }
  return s / rows;
}
