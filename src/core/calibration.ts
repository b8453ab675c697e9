import { logSumExp } from './softmax.js';

/** Bounds on the fitted temperature; a separable validation set would otherwise drive T to 0. */
export const TEMPERATURE_RANGE = { min: 0.01, max: 100 } as const;

/** Mean negative log-likelihood of the labels under softmax(logits / temperature). */
export function meanNll(logits: Float64Array, rows: number, classes: number, labels: ArrayLike<number>, temperature: number): number {
  const beta = 1 / temperature;
  let s = 0;
  for (let r = 0; r < rows; r++) {
    const off = r * classes;
    s += logSumExp(logits, off, classes, beta) - beta * (logits[off + (labels[r] as number)] as number);
  }
  return s / rows;
}

/**
 * First and second derivative of the mean NLL in beta = 1/T:
 * d/dbeta = mean(E_p[z] - z_y), d2/dbeta2 = mean(Var_p[z]) >= 0, so the NLL is convex in beta.
 */
function nllDerivatives(logits: Float64Array, rows: number, classes: number, labels: ArrayLike<number>, beta: number): [number, number] {
  let g = 0;
  let h = 0;
  for (let r = 0; r < rows; r++) {
    const off = r * classes;
    const lse = logSumExp(logits, off, classes, beta);
    let ez = 0;
    let ez2 = 0;
    for (let k = 0; k < classes; k++) {
      const z = logits[off + k] as number;
      const p = Math.exp(beta * z - lse);
      ez += p * z;
      ez2 += p * z * z;
    }
    g += ez - (logits[off + (labels[r] as number)] as number);
    h += Math.max(0, ez2 - ez * ez);
  }
  return [g / rows, h / rows];
}

/**
 * Temperature scaling (Guo et al. 2017, "On Calibration of Modern Neural Networks", ICML):
 * the single T > 0 that minimises the NLL of held-out rows. Found by safeguarded Newton steps
 * on the convex problem in beta = 1/T, clamped to TEMPERATURE_RANGE.
 */
export function fitTemperature(logits: Float64Array, rows: number, classes: number, labels: ArrayLike<number>): number {
  if (rows === 0) return 1;
  let lo = 1 / TEMPERATURE_RANGE.max;
  let hi = 1 / TEMPERATURE_RANGE.min;
  const [gLo, hLo] = nllDerivatives(logits, rows, classes, labels, lo);
  // Every row's logits equal: the NLL does not depend on T at all, so leave it at 1.
  if (hLo === 0) return 1;
  if (gLo >= 0) return 1 / lo;
  const [gHi] = nllDerivatives(logits, rows, classes, labels, hi);
  if (gHi <= 0) return 1 / hi;
  let beta = Math.min(Math.max(1, lo), hi);
  for (let iter = 0; iter < 200; iter++) {
    const [g, h] = nllDerivatives(logits, rows, classes, labels, beta);
    if (g > 0) hi = beta;
    else lo = beta;
    let next = h > 0 ? beta - g / h : NaN;
    if (!(next > lo && next < hi)) next = 0.5 * (lo + hi);
    if (Math.abs(next - beta) <= 1e-13 * Math.max(1, beta) || hi - lo <= 1e-13 * hi) {
      beta = next;
      break;
    }
    beta = next;
  }
  return 1 / beta;
}
