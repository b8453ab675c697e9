import { disagreementScores } from '../ensemble.js';
import { type Envelope, featuresOutside } from './envelope.js';
import { energyScore } from './energy.js';
import { type ClassConditionalModel, type MahalanobisModel, mahalanobisDistance, nearestClassDistance } from './mahalanobis.js';

/** The detectors that can vote on the composite flag, in the order answers list them. */
export const DETECTORS = ['envelope', 'input_mahalanobis', 'feature_mahalanobis', 'energy', 'disagreement'] as const;
export type DetectorName = (typeof DETECTORS)[number];

/** What one ensemble member contributes: detectors fitted on the rows its network trained on. */
export interface MemberModels {
  input_mahalanobis?: MahalanobisModel;
  feature_mahalanobis?: ClassConditionalModel;
}

/** Fitted detectors of one bundle; a missing one is disabled. */
export interface DomainModels {
  envelope: Envelope;
  /** Where answers name the features they hold beyond it (the training range); the envelope when absent. */
  naming?: { low: readonly number[]; high: readonly number[] };
  /** One entry per ensemble member, in member order. */
  members: MemberModels[];
  energy?: { temperature: number };
  /** The members' disagreement (needs two members or more). */
  disagreement?: true;
}

/** One member's network output for the rows of a batch. */
export interface MemberOutput {
  /** rows x width of the member's last hidden layer. */
  hidden: ArrayLike<number>;
  /** rows x classes. */
  logits: ArrayLike<number>;
  /** rows x classes: softmax of the logits at the bundle temperature (needed for disagreement). */
  probabilities?: ArrayLike<number>;
}

/** What the networks gave for a batch, and the inputs they were given. */
export interface BatchView {
  rows: number;
  /** rows x features, raw units (the envelope's). */
  raw: ArrayLike<number>;
  /** rows x features, standardised (the input detector's). */
  standardized: ArrayLike<number>;
  members: MemberOutput[];
  /** Per row, the member whose detectors check it. */
  memberOfRow: ArrayLike<number>;
  /** rows x classes: the ensemble's mean probabilities (needed for disagreement). */
  mean?: ArrayLike<number>;
  classes: number;
}

export interface DomainScores {
  /** Per row, the indices of the features beyond the naming range (the envelope when there is none). */
  outside: number[][];
  /** Per enabled detector, one score per row; larger is further from the training data. */
  scores: Partial<Record<DetectorName, Float64Array>>;
}

/**
 * Scores a batch with every enabled detector. The envelope's score is the number of features
 * outside it (the features named may be more: those beyond the training range); the Mahalanobis scores are distances, each under the models of the member that
 * checks the row; energy is E(x) of that member's logits at the bundle temperature; disagreement
 * is the mean divergence of all members from their mean.
 */
export function scoreDomain(models: DomainModels, view: BatchView): DomainScores {
  const d = models.envelope.low.length;
  const outside: number[][] = new Array(view.rows);
  const env = new Float64Array(view.rows);
  const naming = models.naming;
  for (let r = 0; r < view.rows; r++) {
    const beyond = featuresOutside(models.envelope, view.raw, r * d);
    outside[r] = naming ? featuresOutside(naming, view.raw, r * d) : beyond;
    env[r] = beyond.length;
  }
  const scores: DomainScores['scores'] = { envelope: env };
  const member = (r: number): number => view.memberOfRow[r] as number;
  const first = models.members[0];
  if (first?.input_mahalanobis) {
    const work = new Float64Array(d * 2);
    scores.input_mahalanobis = Float64Array.from({ length: view.rows }, (_, r) =>
      mahalanobisDistance(models.members[member(r)]?.input_mahalanobis as MahalanobisModel, view.standardized, r * d, work),
    );
  }
  if (first?.feature_mahalanobis) {
    const work = new Float64Array(2 * Math.max(...models.members.map((m) => m.feature_mahalanobis?.dim ?? 0)));
    scores.feature_mahalanobis = Float64Array.from({ length: view.rows }, (_, r) => {
      const m = models.members[member(r)]?.feature_mahalanobis as ClassConditionalModel;
      return nearestClassDistance(m, (view.members[member(r)] as MemberOutput).hidden, r * m.dim, work);
    });
  }
  const energy = models.energy;
  if (energy) {
    scores.energy = Float64Array.from({ length: view.rows }, (_, r) => energyScore((view.members[member(r)] as MemberOutput).logits, r * view.classes, view.classes, energy.temperature));
  }
  if (models.disagreement) {
    scores.disagreement = disagreementScores(
      view.members.map((o) => o.probabilities as ArrayLike<number>),
      view.mean as ArrayLike<number>,
      view.rows,
      view.classes,
    );
  }
  return { outside, scores };
}
