import { type TemperatureFit, fitEnsembleTemperature } from '../core/calibration.js';
import { ensembleProbabilitiesInto } from '../core/ensemble.js';
import { argmaxRows, brierScore, classificationMetrics, expectedCalibrationError, logLoss } from '../core/metrics.js';
import { type Network, forward } from '../core/network.js';
import { topTwo } from '../core/softmax.js';
import { takeRows } from '../core/split.js';
import { type Standardizer, standardize } from '../core/standardize.js';
import type { Metrics } from './schema.js';

export const ECE_BINS = 15; // Guo et al. 2017 report ECE with M = 15 bins

/** Labelled rows (raw units), each with the member that never saw it. */
export interface HeldOutRows {
  x: Float64Array;
  labels: Int32Array;
  rows: number;
  memberOf: Int32Array;
}

export interface LossSummary {
  log_loss: number;
  brier: number;
  ece: number;
}

export interface Evaluation {
  temperature: number;
  fit: TemperatureFit['fit'] | 'not_fitted';
  metrics: Metrics | null;
  before: LossSummary | null;
  after: LossSummary | null;
  /** Per held-out row, the predicted class and the margin at the fitted temperature. */
  predicted: Int32Array;
  margins: Float64Array;
}

/**
 * The held-out rows' logits from the networks that never saw them, as an ensemble: one
 * rows x classes array per position in the ensemble. `networksFor(m)` lists the networks that
 * answer the rows of member m (the same number for every m), in a fixed order.
 */
export function heldOutLogits(networksFor: (member: number) => readonly Network[], preprocess: Standardizer, held: Omit<HeldOutRows, 'labels'>, classes: number): Float64Array[] {
  const d = preprocess.mean.length;
  const byMember = new Map<number, number[]>();
  for (let r = 0; r < held.rows; r++) {
    const m = held.memberOf[r] as number;
    byMember.set(m, [...(byMember.get(m) ?? []), r]);
  }
  const size = byMember.size === 0 ? 0 : networksFor(held.memberOf[0] as number).length;
  const out = Array.from({ length: size }, () => new Float64Array(held.rows * classes));
  for (const [m, rows] of byMember) {
    const z = standardize(preprocess, takeRows(held.x, d, rows), rows.length);
    networksFor(m).forEach((net, j) => {
      const logits = forward(net, z, rows.length).logits;
      rows.forEach((r, i) => (out[j] as Float64Array).set(logits.subarray(i * classes, (i + 1) * classes), r * classes));
    });
  }
  return out;
}

function summary(p: Float64Array, rows: number, classes: number, labels: Int32Array): LossSummary {
  return { log_loss: logLoss(p, rows, classes, labels), brier: brierScore(p, rows, classes, labels), ece: expectedCalibrationError(p, rows, classes, labels, ECE_BINS) };
}

/** The mean of the members' softmax(z / T), rows x classes. */
export function ensembleAnswer(logits: readonly Float64Array[], rows: number, classes: number, temperature: number): { mean: Float64Array; members: Float64Array[] } {
  const members = logits.map(() => new Float64Array(rows * classes));
  const mean = new Float64Array(rows * classes);
  ensembleProbabilitiesInto(logits, rows, classes, temperature, members, mean);
  return { mean, members };
}

/**
 * Scores held-out rows with networks that never saw them, answering together as the served
 * ensemble does (logits: one rows x classes array per network), fits the temperature on them
 * when asked, and measures what a user should know before trusting the bundle: accuracy and
 * per-class figures, and log-loss, Brier score and ECE before and after the temperature.
 */
export function evaluateHeldOut(logits: readonly Float64Array[], labels: Int32Array, classes: string[], fit: boolean): Evaluation {
  const rows = labels.length;
  const K = classes.length;
  if (rows === 0 || logits.length === 0) {
    return { temperature: 1, fit: 'not_fitted', metrics: null, before: null, after: null, predicted: new Int32Array(0), margins: new Float64Array(0) };
  }
  const t: { temperature: number; fit: Evaluation['fit'] } = fit ? fitEnsembleTemperature(logits, rows, K, labels) : { temperature: 1, fit: 'not_fitted' };
  const before = ensembleAnswer(logits, rows, K, 1).mean;
  const after = ensembleAnswer(logits, rows, K, t.temperature).mean;
  const predicted = argmaxRows(after, rows, K);
  const m = classificationMetrics(labels, predicted, K);
  const margins = new Float64Array(rows);
  for (let r = 0; r < rows; r++) margins[r] = topTwo(after, r * K, K).margin;
  return {
    temperature: t.temperature,
    fit: t.fit,
    metrics: {
      accuracy: m.accuracy,
      macro_f1: m.macro_f1,
      per_class: Object.fromEntries(classes.map((c, k) => [c, m.per_class[k] as Metrics['per_class'][string]])),
      confusion: m.confusion,
    },
    before: summary(before, rows, K, labels),
    after: summary(after, rows, K, labels),
    predicted,
    margins,
  };
}
