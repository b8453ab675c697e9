import { DETECTORS, type DetectorName, type DomainModels } from '../core/domain/detectors.js';
import { type ClassConditionalModel, type MahalanobisModel, whitenMeans } from '../core/domain/mahalanobis.js';
import type { Domain } from './schema.js';

/** The lower triangle of a row-major n x n matrix, row by row. */
export function packLower(m: Float64Array, n: number): number[] {
  const out: number[] = [];
  for (let i = 0; i < n; i++) for (let k = 0; k <= i; k++) out.push(m[i * n + k] as number);
  return out;
}

export function unpackLower(packed: readonly number[], n: number): Float64Array {
  const m = new Float64Array(n * n);
  let at = 0;
  for (let i = 0; i < n; i++) for (let k = 0; k <= i; k++) m[i * n + k] = packed[at++] as number;
  return m;
}

/** n from the length n(n+1)/2 of a packed triangle, or -1 when no n fits. */
export function triangleSide(length: number): number {
  const n = Math.round((Math.sqrt(8 * length + 1) - 1) / 2);
  return (n * (n + 1)) / 2 === length ? n : -1;
}

export interface DomainRuntime {
  models: DomainModels;
  thresholds: Record<DetectorName, number>;
  enabled: DetectorName[];
}

/** Turns the bundle's domain section into the detectors the scorer runs. */
export function decodeDomain(domain: Domain, temperature: number): DomainRuntime {
  const models: DomainModels = { envelope: domain.envelope };
  const thresholds = { envelope: 0, input_mahalanobis: Infinity, feature_mahalanobis: Infinity, energy: Infinity } as Record<DetectorName, number>;
  const input = domain.input_mahalanobis;
  if (input) {
    const dim = input.mean.length;
    models.input_mahalanobis = { dim, mean: Float64Array.from(input.mean), cholesky: unpackLower(input.cholesky, dim), shrinkage: input.shrinkage } satisfies MahalanobisModel;
    thresholds.input_mahalanobis = input.threshold;
  }
  const feature = domain.feature_mahalanobis;
  if (feature) {
    const dim = feature.class_means[0]?.length ?? 0;
    const means = Float64Array.from(feature.class_means.flat());
    const l = unpackLower(feature.cholesky, dim);
    models.feature_mahalanobis = {
      dim,
      classes: feature.class_means.length,
      means,
      cholesky: l,
      shrinkage: feature.shrinkage,
      whitenedMeans: whitenMeans(means, l, dim, feature.class_means.length),
    } satisfies ClassConditionalModel;
    thresholds.feature_mahalanobis = feature.threshold;
  }
  if (domain.energy) {
    models.energy = { temperature };
    thresholds.energy = domain.energy.threshold;
  }
  return { models, thresholds, enabled: DETECTORS.filter((d) => d === 'envelope' || domain[d] !== undefined) };
}
