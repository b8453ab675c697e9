import { describe, expect, it } from 'vitest';
import { fitClassConditional, fitMahalanobis, mahalanobisDistance, nearestClassDistance } from '../../../src/core/domain/mahalanobis.js';
import { quantileSorted, sortedCopy } from '../../../src/core/describe.js';
import { createRng } from '../../../src/core/rng.js';

function gaussian(rows: number, dim: number, seed: number): Float64Array {
  const rng = createRng(seed);
  return Float64Array.from({ length: rows * dim }, () => rng.normal());
}

describe('input Mahalanobis distance', () => {
  // The squared Mahalanobis distance of a d-dimensional Gaussian follows chi-square with d degrees
  // of freedom. Upper-tail critical values from the NIST/SEMATECH e-Handbook of Statistical
  // Methods, section 1.3.6.7.4 (table of the chi-square distribution).
  const table: Array<[number, number, number]> = [
    // [d, chi2 at 0.95, chi2 at 0.99]
    [2, 5.991, 9.21],
    [5, 11.07, 15.086],
    [10, 18.307, 23.209],
  ];
  for (const [d, q95, q99] of table) {
    it(`gives d^2 whose 0.95 and 0.99 quantiles match the chi-square table for ${d} degrees of freedom`, () => {
      const model = fitMahalanobis(gaussian(50_000, d, d), 50_000, d);
      const fresh = gaussian(40_000, d, 100 + d);
      const d2 = Float64Array.from({ length: 40_000 }, (_, r) => mahalanobisDistance(model, fresh, r * d) ** 2);
      const sorted = sortedCopy(d2);
      // sampling error of an empirical quantile with n = 40,000 is below 1.5% here; allow 3%
      expect(quantileSorted(sorted, 0.95) / q95).toBeGreaterThan(0.97);
      expect(quantileSorted(sorted, 0.95) / q95).toBeLessThan(1.03);
      expect(quantileSorted(sorted, 0.99) / q99).toBeGreaterThan(0.97);
      expect(quantileSorted(sorted, 0.99) / q99).toBeLessThan(1.03);
    });
  }

  it('is the Euclidean distance for the identity covariance, as worked by hand', () => {
    const model = { dim: 2, mean: Float64Array.of(1, 1), cholesky: Float64Array.of(1, 0, 0, 1), shrinkage: 0 };
    expect(mahalanobisDistance(model, [4, 5])).toBeCloseTo(5, 14); // 3-4-5 triangle
  });

  it('weighs each direction by its spread: covariance diag(4, 1) halves the first coordinate', () => {
    const model = { dim: 2, mean: Float64Array.of(0, 0), cholesky: Float64Array.of(2, 0, 0, 1), shrinkage: 0 };
    expect(mahalanobisDistance(model, [6, 0])).toBeCloseTo(3, 14);
    expect(mahalanobisDistance(model, [0, 3])).toBeCloseTo(3, 14);
  });

  it('stays finite with a constant feature, and flags a change in it', () => {
    const rng = createRng(3);
    const x = Float64Array.from({ length: 500 * 3 }, (_, i) => (i % 3 === 1 ? 0 : rng.normal()));
    const model = fitMahalanobis(x, 500, 3);
    expect(Number.isFinite(mahalanobisDistance(model, [0.1, 0, -0.2]))).toBe(true);
    expect(mahalanobisDistance(model, [0.1, 5, -0.2])).toBeGreaterThan(10 * mahalanobisDistance(model, [0.1, 0, -0.2]));
  });
});

describe('with too few rows for any covariance', () => {
  it('falls back to full shrinkage rather than failing', () => {
    const model = fitMahalanobis(Float64Array.of(1, 2, 3, 4, 5, 2, 3, 4, 5, 7), 2, 5);
    expect(model.shrinkage).toBe(1);
    expect(Number.isFinite(mahalanobisDistance(model, [1, 2, 3, 4, 5]))).toBe(true);
  });
});

describe('feature-space Mahalanobis (Lee et al. 2018)', () => {
  it('measures the distance to the nearest class mean under one tied covariance', () => {
    const rng = createRng(4);
    const rows = 2000;
    const labels = Int32Array.from({ length: rows }, (_, i) => i % 2);
    // class 0 around (-5, 0), class 1 around (5, 0), unit spread
    const h = Float64Array.from({ length: rows * 2 }, (_, i) => (i % 2 === 0 ? (labels[Math.floor(i / 2)] === 0 ? -5 : 5) : 0) + rng.normal());
    const model = fitClassConditional(h, labels, rows, 2, 2);
    expect(model.means[0]).toBeCloseTo(-5, 1);
    expect(model.means[2]).toBeCloseTo(5, 1);
    expect(nearestClassDistance(model, [5, 0])).toBeLessThan(0.2);
    expect(nearestClassDistance(model, [-5, 0])).toBeLessThan(0.2);
    // the midpoint between the classes is 5 spreads from both
    expect(nearestClassDistance(model, [0, 0])).toBeGreaterThan(4.5);
  });
});
