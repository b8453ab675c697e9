import { DETECTORS, type DetectorName, type DomainModels, type MemberModels } from '../core/domain/detectors.js';
import { type ClassConditionalModel, type MahalanobisModel, whitenMeans } from '../core/domain/mahalanobis.js';
import { type AnyBundleFile, BUNDLE_FORMAT_V1 } from './schema.js';

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
  /** The detectors that vote, in the order answers list them. */
  enabled: DetectorName[];
}

function gaussian(g: { mean: number[]; cholesky: number[]; shrinkage: number }): MahalanobisModel {
  const dim = g.mean.length;
  return { dim, mean: Float64Array.from(g.mean), cholesky: unpackLower(g.cholesky, dim), shrinkage: g.shrinkage };
}

function classGaussian(g: { class_means: number[][]; cholesky: number[]; shrinkage: number }): ClassConditionalModel {
  const dim = g.class_means[0]?.length ?? 0;
  const means = Float64Array.from(g.class_means.flat());
  const l = unpackLower(g.cholesky, dim);
  return { dim, classes: g.class_means.length, means, cholesky: l, shrinkage: g.shrinkage, whitenedMeans: whitenMeans(means, l, dim, g.class_means.length) };
}

/** Turns a bundle's domain section, either version, into the detectors the scorer runs. */
export function decodeDomain(file: AnyBundleFile): DomainRuntime {
  const thresholds = { envelope: 0, input_mahalanobis: Infinity, feature_mahalanobis: Infinity, energy: Infinity, disagreement: Infinity } as Record<DetectorName, number>;
  const temperature = file.calibration.temperature;
  const members: MemberModels[] = [];
  const dom = file.domain;
  if (file.format === BUNDLE_FORMAT_V1) {
    const v1 = file.domain;
    const member: MemberModels = {};
    if (v1.input_mahalanobis) member.input_mahalanobis = gaussian(v1.input_mahalanobis);
    if (v1.feature_mahalanobis) member.feature_mahalanobis = classGaussian(v1.feature_mahalanobis);
    members.push(member);
  } else {
    const v2 = file.domain;
    file.members.forEach((_, m) => {
      const member: MemberModels = {};
      const input = v2.input_mahalanobis?.members[m];
      if (input) member.input_mahalanobis = gaussian(input);
      const feature = v2.feature_mahalanobis?.members[m];
      if (feature) member.feature_mahalanobis = classGaussian(feature);
      members.push(member);
    });
  }
  const models: DomainModels = { envelope: { tolerance: dom.envelope.tolerance, low: dom.envelope.low, high: dom.envelope.high }, members };
  if ('range' in dom.envelope) models.naming = dom.envelope.range;
  if (dom.input_mahalanobis) thresholds.input_mahalanobis = dom.input_mahalanobis.threshold;
  if (dom.feature_mahalanobis) thresholds.feature_mahalanobis = dom.feature_mahalanobis.threshold;
  if (dom.energy) {
    models.energy = { temperature };
    thresholds.energy = dom.energy.threshold;
  }
  if ('disagreement' in dom && dom.disagreement) {
    models.disagreement = true;
    thresholds.disagreement = dom.disagreement.threshold;
  }
  return { models, thresholds, enabled: DETECTORS.filter((d) => d === 'envelope' || (dom as Record<string, unknown>)[d] !== undefined) };
}
