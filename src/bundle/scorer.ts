import { type MemberOutput, scoreDomain } from '../core/domain/detectors.js';
import { ensembleProbabilitiesInto, memberForRow } from '../core/ensemble.js';
import { decodeDomain } from './domain-codec.js';
import type { ForwardPass } from '../core/network.js';
import { createFastForwardPass } from '../core/wasm/forward-pass.js';
import { topTwo } from '../core/softmax.js';
import { standardizeInto } from '../core/standardize.js';
import type { LoadedBundle } from './verify.js';
import type { ModelRef } from '../contracts/model-ref.js';
import type { DomainCheck, ScoreOutcome } from '../contracts/score.js';

/** The network or a detector gave a non-finite value for a row: its values are too extreme to score. */
export class ScoreOverflowError extends Error {
  constructor(readonly row: number) {
    super(`row ${row}: the network overflows on these values (a logit is not finite)`);
    this.name = 'ScoreOverflowError';
  }
}

export interface Scorer {
  readonly bundle: LoadedBundle;
  readonly featureNames: readonly string[];
  /** Position of each feature name in the vector. */
  readonly featureIndex: ReadonlyMap<string, number>;
  /**
   * Scores rows x features (row-major, raw units); results in row order. Throws ScoreOverflowError.
   * With `probabilities`, also writes the rows x classes probabilities there, in the bundle's class
   * order (the audit log keeps them as a vector: no conversion back from the answer's record).
   */
  scoreRows(x: Float64Array, rows: number, probabilities?: Float64Array): ScoreOutcome[];
}

/**
 * The scoring path shared by the service and the offline command: standardise, every member's
 * forward pass, the mean of the members' softmax at the bundle's temperature, margin, and the
 * domain checks with their reasons. A row is in domain when every voting detector's value is at
 * most its threshold. A version-1 bundle is one member, scored exactly as version 1 scored it.
 */
export function createScorer(bundle: LoadedBundle): Scorer {
  const { file } = bundle;
  const d = file.features.length;
  const K = file.classes.length;
  const M = bundle.members.length;
  const temperature = file.calibration.temperature;
  const domain = decodeDomain(file);
  // Features are named with the range that named them: the training range (format 2) or the envelope (format 1).
  const env = domain.models.naming ?? domain.models.envelope;
  const reviewMargin = file.domain.review_margin;
  const passes: ForwardPass[] = bundle.members.map((net) => createFastForwardPass(net));
  let z = new Float64Array(0);
  let p = new Float64Array(0);
  let memberP: Float64Array[] = [];
  let memberOfRow = new Int32Array(0);

  return {
    bundle,
    featureNames: file.features.map((f) => f.name),
    featureIndex: new Map(file.features.map((f, j) => [f.name, j])),
    scoreRows(x, rows, probabilitiesOut) {
      if (z.length < rows * d) z = new Float64Array(rows * d);
      if (p.length < rows * K) {
        p = new Float64Array(rows * K);
        memberP = bundle.members.map(() => new Float64Array(rows * K));
      }
      if (memberOfRow.length < rows) memberOfRow = new Int32Array(rows);
      // The very arithmetic the detectors were calibrated with: a threshold can sit exactly on a
      // held-out score, and multiplying by 1/scale instead of dividing could tip it over.
      standardizeInto(file.preprocess, x, rows, z);
      const outputs: MemberOutput[] = passes.map((pass) => {
        const { logits, hidden } = pass.run(z, rows);
        // Never answer NaN: a value that overflows the network is refused, not guessed at.
        for (let i = 0; i < rows * K; i++) if (!Number.isFinite(logits[i] as number)) throw new ScoreOverflowError(Math.floor(i / K));
        return { logits, hidden };
      });
      ensembleProbabilitiesInto(outputs.map((o) => o.logits), rows, K, temperature, memberP, p);
      probabilitiesOut?.set(p.subarray(0, rows * K));
      outputs.forEach((o, m) => (o.probabilities = memberP[m]));
      for (let r = 0; r < rows; r++) memberOfRow[r] = memberForRow(x, r * d, d, M);
      const out: ScoreOutcome[] = new Array(rows);
      const { outside: outsideIdx, scores } = scoreDomain(domain.models, { rows, raw: x, standardized: z, members: outputs, memberOfRow, mean: p, classes: K });
      // A detector value that overflows (a near-singular covariance, a hidden layer at 1e308) is
      // refused like an overflowing logit: no answer may carry a number JSON cannot hold.
      for (const detector of domain.enabled) {
        const v = scores[detector] as Float64Array;
        for (let r = 0; r < rows; r++) if (!Number.isFinite(v[r] as number)) throw new ScoreOverflowError(r);
      }
      for (let r = 0; r < rows; r++) {
        const top = topTwo(p, r * K, K);
        const probabilities: Record<string, number> = {};
        for (let k = 0; k < K; k++) probabilities[file.classes[k] as string] = p[r * K + k] as number;
        const outside = (outsideIdx[r] as number[]).map((j) => {
          const f = file.features[j];
          return {
            feature: f?.name ?? '',
            value: x[r * d + j] as number,
            low: env.low[j] as number,
            high: env.high[j] as number,
            unit: f?.unit ?? '',
          };
        });
        const checks: DomainCheck[] = domain.enabled.map((detector) => {
          const value = (scores[detector] as Float64Array)[r] as number;
          const threshold = domain.thresholds[detector];
          return { detector, value, threshold, passed: value <= threshold };
        });
        const inDomain = checks.every((c) => c.passed);
        out[r] = {
          label: file.classes[top.index] as string,
          probabilities,
          margin: top.margin,
          review: !inDomain || top.margin < reviewMargin,
          domain: { in_domain: inDomain, checks, outside },
        };
      }
      return out;
    },
  };
}

export function modelRef(bundle: LoadedBundle): ModelRef {
  return { name: bundle.file.name, version: bundle.file.version, sha256: bundle.file.sha256 };
}
