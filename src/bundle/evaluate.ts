import { fitTemperature } from '../core/calibration.js';
import { argmaxRows, classificationMetrics, expectedCalibrationError } from '../core/metrics.js';
import { type Network, forward } from '../core/network.js';
import { softmaxRowsInto, topTwo } from '../core/softmax.js';
import { type Standardizer, standardize } from '../core/standardize.js';
import type { Metrics } from './schema.js';

export const ECE_BINS = 15; // Guo et al. 2017 report ECE with M = 15 bins

export interface Evaluation {
  temperature: number;
  metrics: Metrics | null;
  eceBefore: number | null;
  eceAfter: number | null;
  predicted: Int32Array;
  margins: Float64Array;
}

/**
 * Scores held-out rows (raw units) with the network as it will be served, fits the temperature
 * on them when asked, and measures what a user should know before trusting the bundle.
 */
export function evaluateHeldOut(
  net: Network,
  preprocess: Standardizer,
  x: Float64Array,
  labels: Int32Array,
  classes: string[],
  fit: boolean,
): Evaluation {
  const rows = labels.length;
  const K = classes.length;
  if (rows === 0) {
    return { temperature: 1, metrics: null, eceBefore: null, eceAfter: null, predicted: new Int32Array(0), margins: new Float64Array(0) };
  }
  const { logits } = forward(net, standardize(preprocess, x, rows), rows);
  const temperature = fit ? fitTemperature(logits, rows, K, labels) : 1;
  const before = new Float64Array(rows * K);
  const after = new Float64Array(rows * K);
  softmaxRowsInto(logits, rows, K, 1, before);
  softmaxRowsInto(logits, rows, K, temperature, after);
  const predicted = argmaxRows(logits, rows, K);
  const m = classificationMetrics(labels, predicted, K);
  const margins = new Float64Array(rows);
  for (let r = 0; r < rows; r++) margins[r] = topTwo(after, r * K, K).margin;
  return {
    temperature,
    metrics: {
      accuracy: m.accuracy,
      macro_f1: m.macro_f1,
      per_class: Object.fromEntries(classes.map((c, k) => [c, m.per_class[k] as Metrics['per_class'][string]])),
      confusion: m.confusion,
    },
    eceBefore: expectedCalibrationError(before, rows, K, labels, ECE_BINS),
    eceAfter: expectedCalibrationError(after, rows, K, labels, ECE_BINS),
    predicted,
    margins,
  };
}
