import { cholesky, inverseQuadraticForm } from '../linalg.js';
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
  return { dim, mean: lw.mean, cholesky: cholesky(lw.covariance, dim), shrinkage: lw.shrinkage };
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
  return { dim, classes, means, cholesky: cholesky(lw.covariance, dim), shrinkage: lw.shrinkage };
}

export function nearestClassDistance(m: ClassConditionalModel, h: ArrayLike<number>, offset = 0, work: Float64Array = new Float64Array(m.dim * 2)): number {
  const v = work.subarray(m.dim);
  let best = Infinity;
  for (let k = 0; k < m.classes; k++) {
    for (let j = 0; j < m.dim; j++) v[j] = (h[offset + j] as number) - (m.means[k * m.dim + j] as number);
    best = Math.min(best, inverseQuadraticForm(m.cholesky, m.dim, v, work));
  }
  return Math.sqrt(best);
}
