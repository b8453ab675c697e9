import { cholesky, forwardSubstitute, inverseQuadraticForm } from '../linalg.js';
import { ledoitWolf, ledoitWolfCentred } from './ledoit-wolf.js';

/** A Gaussian model of the rows: location and the Cholesky factor of a shrunk covariance. */
export interface MahalanobisModel {
  dim: number;
  mean: Float64Array;
  /** Lower-triangular L with covariance = L L^T, row-major dim x dim. */
  cholesky: Float64Array;
  shrinkage: number;
}

/**
 * Input-space detector: Mahalanobis distance of a standardised row to the training rows, with a
 * Ledoit-Wolf covariance so that few rows or constant features still give an invertible matrix
 * (Ledoit & Wolf 2004). For Gaussian data d^2 follows chi-square with dim degrees of freedom.
 */
export function fitMahalanobis(x: Float64Array, rows: number, dim: number): MahalanobisModel {
  const lw = ledoitWolf(x, rows, dim);
  const { l, shrinkage } = factor(lw.covariance, dim, lw.shrinkage);
  return { dim, mean: lw.mean, cholesky: l, shrinkage };
}

/**
 * Cholesky of the shrunk covariance; when too few rows leave it singular even so (two rows give
 * shrinkage 0), fall back to full shrinkage: the scaled identity mu I.
 */
function factor(covariance: Float64Array, dim: number, shrinkage: number): { l: Float64Array; shrinkage: number } {
  try {
    return { l: cholesky(covariance, dim), shrinkage };
  } catch {
    let trace = 0;
    for (let j = 0; j < dim; j++) trace += covariance[j * dim + j] as number;
    const mu = trace / dim > 0 ? trace / dim : 1;
    const identity = new Float64Array(dim * dim);
    for (let j = 0; j < dim; j++) identity[j * dim + j] = mu;
    return { l: cholesky(identity, dim), shrinkage: 1 };
  }
}

export function mahalanobisDistance(m: MahalanobisModel, x: ArrayLike<number>, offset = 0, work: Float64Array = new Float64Array(m.dim * 2)): number {
  const v = work.subarray(m.dim);
  for (let j = 0; j < m.dim; j++) v[j] = (x[offset + j] as number) - (m.mean[j] as number);
  return Math.sqrt(inverseQuadraticForm(m.cholesky, m.dim, v, work));
}

/** Class-conditional means with one tied (shrunk) covariance, on the last hidden layer. */
export interface ClassConditionalModel {
  dim: number;
  classes: number;
  /** classes x dim, row-major. */
  means: Float64Array;
  cholesky: Float64Array;
  shrinkage: number;
  /** L^-1 mu_k per class, so that scoring whitens a row once rather than once per class. */
  whitenedMeans: Float64Array;
}

/** L^-1 mu_k for every class mean: d^2(h, mu_k) = ||L^-1 h - L^-1 mu_k||^2. */
export function whitenMeans(means: Float64Array, cholesky: Float64Array, dim: number, classes: number): Float64Array {
  const out = new Float64Array(classes * dim);
  const tmp = new Float64Array(dim);
  for (let k = 0; k < classes; k++) out.set(forwardSubstitute(cholesky, dim, means, tmp, k * dim), k * dim);
  return out;
}

/**
 * Feature-space detector of Lee et al. 2018 ("A simple unified framework for detecting
 * out-of-distribution samples and adversarial attacks", NeurIPS): a Gaussian per class with a
 * shared covariance fitted on the last hidden layer's activations; the score is the distance to
 * the nearest class mean. The tied covariance is shrunk (Ledoit-Wolf) because ReLU units that
 * never fire make the plain estimate singular. A class without rows gets the overall mean.
 */
export function fitClassConditional(h: Float64Array, labels: ArrayLike<number>, rows: number, dim: number, classes: number): ClassConditionalModel {
  const means = new Float64Array(classes * dim);
  const counts = new Float64Array(classes);
  const overall = new Float64Array(dim);
  for (let i = 0; i < rows; i++) {
    const k = labels[i] as number;
    counts[k] = (counts[k] as number) + 1;
    for (let j = 0; j < dim; j++) {
      const v = h[i * dim + j] as number;
      means[k * dim + j] = (means[k * dim + j] as number) + v;
      overall[j] = (overall[j] as number) + v / rows;
    }
  }
  for (let k = 0; k < classes; k++) {
    for (let j = 0; j < dim; j++) means[k * dim + j] = (counts[k] as number) > 0 ? (means[k * dim + j] as number) / (counts[k] as number) : (overall[j] as number);
  }
  const lw = ledoitWolfCentred(h, rows, dim, overall, (i) => means.subarray((labels[i] as number) * dim, ((labels[i] as number) + 1) * dim));
  const { l, shrinkage } = factor(lw.covariance, dim, lw.shrinkage);
  return { dim, classes, means, cholesky: l, shrinkage, whitenedMeans: whitenMeans(means, l, dim, classes) };
}

export function nearestClassDistance(m: ClassConditionalModel, h: ArrayLike<number>, offset = 0, work: Float64Array = new Float64Array(m.dim * 2)): number {
  const w = forwardSubstitute(m.cholesky, m.dim, h, work, offset);
  let best = Infinity;
  for (let k = 0; k < m.classes; k++) {
    let s = 0;
    const base = k * m.dim;
    for (let j = 0; j < m.dim; j++) {
      const diff = (w[j] as number) - (m.whitenedMeans[base + j] as number);
      s += diff * diff;
    }
    if (s < best) best = s;
  }
  return Math.sqrt(best);
}
