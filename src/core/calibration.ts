import { logSumExp } from './softmax.js';

/** Bounds on the fitted temperature. */
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

export interface TemperatureFit {
  temperature: number;
  /**
   * fitted: the NLL has its minimum inside TEMPERATURE_RANGE; separable: it keeps falling as T
   * goes to 0 (every row's own class has the largest logit, or nearly so), so the rows give no
   * temperature and the logits are left unsharpened (T = 1); flat: the NLL does not depend on T.
   */
  fit: 'fitted' | 'separable' | 'flat';
}

/**
 * Temperature scaling (Guo et al. 2017, "On Calibration of Modern Neural Networks", ICML):
 * the single T > 0 that minimises the NLL of held-out rows. Found by safeguarded Newton steps
 * on the convex problem in beta = 1/T. Where the minimum lies beyond the smallest temperature
 * allowed, the NLL has no interior minimum (separable rows: the fit would make every answer
 * certain, wrong ones included), and T stays 1 rather than collapse; the largest temperature
 * bounds the other side.
 */
export function fitTemperature(logits: Float64Array, rows: number, classes: number, labels: ArrayLike<number>): TemperatureFit {
  if (rows === 0) return { temperature: 1, fit: 'flat' };
  let lo = 1 / TEMPERATURE_RANGE.max;
  let hi = 1 / TEMPERATURE_RANGE.min;
  const [gLo, hLo] = nllDerivatives(logits, rows, classes, labels, lo);
  // Every row's logits equal: the NLL does not depend on T at all, so leave it at 1.
  if (hLo === 0) return { temperature: 1, fit: 'flat' };
  if (gLo >= 0) return { temperature: 1 / lo, fit: 'fitted' };
  const [gHi] = nllDerivatives(logits, rows, classes, labels, hi);
  if (gHi <= 0) return { temperature: 1, fit: 'separable' };
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
  return { temperature: 1 / beta, fit: 'fitted' };
}

/**
 * Mean negative log-likelihood of the labels under an ensemble's answer: the mean over members of
 * softmax(logits_m / temperature), each member's logits rows x classes in the same row order.
 */
export function ensembleMeanNll(logits: readonly Float64Array[], rows: number, classes: number, labels: ArrayLike<number>, temperature: number): number {
  const beta = 1 / temperature;
  const M = logits.length;
  let s = 0;
  for (let r = 0; r < rows; r++) {
    const off = r * classes;
    const y = labels[r] as number;
    let p = 0;
    for (const z of logits) p += Math.exp(beta * (z[off + y] as number) - logSumExp(z, off, classes, beta));
    // A row no member gives any probability contributes its floor rather than Infinity.
    s -= Math.log(Math.max(p / M, Number.MIN_VALUE));
  }
  return s / rows;
}

/**
 * The temperature of an ensemble that answers with the mean of its members' softmax(z / T):
 * the T minimising ensembleMeanNll over held-out rows, each answered by members that never saw
 * it (the ensemble is calibrated as a whole, after pooling: Rahaman & Thiery 2021, NeurIPS,
 * "Uncertainty quantification and deep ensembles"). The mixture's NLL is not convex in T, so the
 * minimum is bracketed on a grid of log T over TEMPERATURE_RANGE and refined by golden-section
 * search. As for one network, a minimum at the smallest temperature is no interior minimum: T
 * stays 1 ('separable'). With one member this is fitTemperature.
 */
export function fitEnsembleTemperature(logits: readonly Float64Array[], rows: number, classes: number, labels: ArrayLike<number>): TemperatureFit {
  if (logits.length === 1) return fitTemperature(logits[0] as Float64Array, rows, classes, labels);
  if (rows === 0) return { temperature: 1, fit: 'flat' };
  const f = (u: number): number => ensembleMeanNll(logits, rows, classes, labels, Math.exp(u));
  const lo = Math.log(TEMPERATURE_RANGE.min);
  const hi = Math.log(TEMPERATURE_RANGE.max);
  const steps = 120;
  let best = 0;
  let bestValue = Infinity;
  const values: number[] = [];
  for (let i = 0; i <= steps; i++) {
    const v = f(lo + ((hi - lo) * i) / steps);
    values.push(v);
    if (v < bestValue) {
      bestValue = v;
      best = i;
    }
  }
  if (values.every((v) => v === values[0])) return { temperature: 1, fit: 'flat' };
  if (best === 0) return { temperature: 1, fit: 'separable' };
  if (best === steps) return { temperature: TEMPERATURE_RANGE.max, fit: 'fitted' };
  // Golden-section search inside the grid cells either side of the best grid point.
  let a = lo + ((hi - lo) * (best - 1)) / steps;
  let b = lo + ((hi - lo) * (best + 1)) / steps;
  const g = (Math.sqrt(5) - 1) / 2;
  let c = b - g * (b - a);
  let d = a + g * (b - a);
  let fc = f(c);
  let fd = f(d);
  while (b - a > 1e-10) {
    if (fc < fd) {
      b = d;
      d = c;
      fd = fc;
      c = b - g * (b - a);
      fc = f(c);
    } else {
      a = c;
      c = d;
      fc = fd;
      d = a + g * (b - a);
      fd = f(d);
    }
  }
  return { temperature: Math.exp((a + b) / 2), fit: 'fitted' };
}
