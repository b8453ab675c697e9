import { type Envelope, featuresOutside } from './envelope.js';
import { energyScore } from './energy.js';
import { type ClassConditionalModel, type MahalanobisModel, mahalanobisDistance, nearestClassDistance } from './mahalanobis.js';

/** The detectors that can vote on the composite flag, in the order answers list them. */
export const DETECTORS = ['envelope', 'input_mahalanobis', 'feature_mahalanobis', 'energy'] as const;
export type DetectorName = (typeof DETECTORS)[number];

/** Fitted detectors of one bundle; a missing one is disabled. */
export interface DomainModels {
  envelope: Envelope;
  input_mahalanobis?: MahalanobisModel;
  feature_mahalanobis?: ClassConditionalModel;
  energy?: { temperature: number };
}

/** What the network gave for a batch, and the inputs it was given. */
export interface BatchView {
  rows: number;
  /** rows x features, raw units (the envelope's). */
  raw: ArrayLike<number>;
  /** rows x features, standardised (the input detector's). */
  standardized: ArrayLike<number>;
  /** rows x width of the last hidden layer. */
  hidden: ArrayLike<number>;
  /** rows x classes. */
  logits: ArrayLike<number>;
  classes: number;
}

export interface DomainScores {
  /** Per row, the indices of the features outside the envelope. */
  outside: number[][];
  /** Per enabled detector, one score per row; larger is further from the training data. */
  scores: Partial<Record<DetectorName, Float64Array>>;
}

/**
 * Scores a batch with every enabled detector. The envelope's score is the number of features
 * outside it; the Mahalanobis scores are distances; energy is E(x) at the bundle temperature.
 */
export function scoreDomain(models: DomainModels, view: BatchView): DomainScores {
  const d = models.envelope.low.length;
  const outside: number[][] = new Array(view.rows);
  const env = new Float64Array(view.rows);
  for (let r = 0; r < view.rows; r++) {
    outside[r] = featuresOutside(models.envelope, view.raw, r * d);
    env[r] = (outside[r] as number[]).length;
  }
  const scores: DomainScores['scores'] = { envelope: env };
  const input = models.input_mahalanobis;
  if (input) {
    const work = new Float64Array(input.dim * 2);
    scores.input_mahalanobis = Float64Array.from({ length: view.rows }, (_, r) => mahalanobisDistance(input, view.standardized, r * d, work));
  }
  const feature = models.feature_mahalanobis;
  if (feature) {
    const work = new Float64Array(feature.dim * 2);
    scores.feature_mahalanobis = Float64Array.from({ length: view.rows }, (_, r) => nearestClassDistance(feature, view.hidden, r * feature.dim, work));
  }
  const energy = models.energy;
  if (energy) scores.energy = Float64Array.from({ length: view.rows }, (_, r) => energyScore(view.logits, r * view.classes, view.classes, energy.temperature));
  return { outside, scores };
}
