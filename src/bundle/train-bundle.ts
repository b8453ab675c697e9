import { type ActivationName, DEFAULT_ALPHA } from '../core/activations.js';
import type { DetectorName } from '../core/domain/detectors.js';
import type { Network } from '../core/network.js';
import { createRng, deriveSeed } from '../core/rng.js';
import { take, takeRows } from '../core/split.js';
import type { Standardizer } from '../core/standardize.js';
import type { TrainOptions } from '../core/train.js';
import { type CrossFit, type MemberEpochReport, crossFit, heldOutEnsemble } from './cross-fit.js';
import { DOMAIN_DEFAULTS, type DomainFitInput, fitDomain } from './domain-fit.js';
import { ECE_BINS, type Evaluation, type HeldOutRows, evaluateHeldOut, heldOutLogits } from './evaluate.js';
import { encodeNetwork } from './network-codec.js';
import { fitReference } from './reference.js';
import { BUNDLE_FORMAT, type BundleFile, type FeatureInfo } from './schema.js';
import { sealBundle } from './verify.js';
import type { LabelledTable } from './labelled-table.js';

export { DOMAIN_DEFAULTS } from './domain-fit.js';
export type { LabelledTable } from './labelled-table.js';

export interface BundleOptions extends TrainOptions {
  name: string;
  version: string;
  createdAt: Date;
  /** K of cross-fitting; 1 trains one network beside a hold-out. */
  folds: number;
  /** Share of each network's rows its early stopping watches (the hold-out when folds = 1). */
  validationFraction: number;
  balance: boolean;
  tolerance: number;
  reviewMargin: number;
  /** Detectors besides the envelope that vote on the flag. */
  detectors: readonly DetectorName[];
  /** Share of held-out in-domain rows the flag is calibrated to pass. */
  inDomainRate: number;
  /** Keep in the vote a detector that separates no probe family. */
  keepWeak: boolean;
  /** Held-out in-domain rows (raw units) to calibrate on instead of the validation split. */
  calibrateOn?: { x: Float64Array; rows: number };
  dataSha256: string;
  labelColumn: string;
}

export interface TrainedBundle {
  bundle: BundleFile;
  fit: CrossFit;
  evaluation: Evaluation;
}

/** ISO 8601 in whole seconds, as the bundle stores created_at. */
export function isoSeconds(date: Date): string {
  return date.toISOString().replace(/\.\d{3}Z$/, 'Z');
}

export interface ServingInput {
  members: Network[];
  preprocess: Standardizer;
  temperature: number;
  /** Every row of the data, for the reference statistics. */
  table: LabelledTable;
  /** Per member, the rows of the table its network trained on (its detectors are fitted there). */
  memberRows: number[][];
  /** In-domain rows the flag is calibrated on, each with the member that never saw it (-1: none did). */
  calibration: DomainFitInput['calibration'];
  /** Predicted classes and margins on the evaluated rows, the reference for drift reports. */
  validation: { predicted: Int32Array; margins: Float64Array };
  options: Pick<BundleOptions, 'detectors' | 'inDomainRate' | 'tolerance' | 'reviewMargin' | 'seed' | 'keepWeak'>;
}

/**
 * The parts of a bundle that serve and watch a network, whoever trained it: the domain flag
 * (envelope and detectors, calibrated on held-out rows) and the reference for drift reports.
 */
export function servingSections(input: ServingInput): Pick<BundleFile, 'domain' | 'reference'> {
  const { members, preprocess, table, options } = input;
  const d = table.features.length;
  const memberRows = input.memberRows.map((rows) => ({ x: takeRows(table.x, d, rows), labels: take(table.labels, rows), rows: rows.length }));
  const union = [...new Set(input.memberRows.flat())].sort((a, b) => a - b);
  return {
    domain: fitDomain(
      {
        members,
        preprocess,
        temperature: input.temperature,
        classes: table.classes.length,
        memberRows,
        envelopeRows: { x: takeRows(table.x, d, union), rows: union.length },
        calibration: input.calibration,
        detectors: options.detectors,
        keepWeak: options.keepWeak,
        targetRate: options.inDomainRate,
        tolerance: options.tolerance,
        reviewMargin: options.reviewMargin,
        probeRows: DOMAIN_DEFAULTS.probeRows,
      },
      createRng(deriveSeed(options.seed, 3)),
    ),
    reference: fitReference(
      {
        x: table.x,
        rows: table.rows,
        featureNames: table.features.map((f) => f.name),
        labels: table.labels,
        classes: table.classes,
        validation: input.validation,
      },
      createRng(deriveSeed(options.seed, 2)),
    ),
  };
}

/** The rows of the table that some member never saw, with that member: what calibration and evaluation rest on. */
export function heldOutRows(table: LabelledTable, heldOutBy: Int32Array): HeldOutRows & { indices: number[] } {
  const indices: number[] = [];
  heldOutBy.forEach((m, r) => m >= 0 && indices.push(r));
  return {
    indices,
    x: takeRows(table.x, table.features.length, indices),
    labels: take(table.labels, indices),
    rows: indices.length,
    memberOf: Int32Array.from(indices, (r) => heldOutBy[r] as number),
  };
}

/**
 * Trains the networks on the table (cross-fitting, crossFit) and seals a bundle: every row's
 * out-of-fold answer gives the temperature, the metrics, the calibration of the domain flag and
 * the reference for drift; the members answer together. Deterministic for given data, options
 * and seed.
 */
export function trainBundle(table: LabelledTable, options: BundleOptions, onEpoch?: (r: MemberEpochReport) => void): TrainedBundle {
  const { rows, classes, features } = table;
  const fit = crossFit(table, options, onEpoch);
  const networks = fit.members.map((m) => m.network);
  const held = heldOutRows(table, fit.heldOutBy);
  const answers = heldOutLogits((m) => heldOutEnsemble(fit, m), fit.preprocess, held, classes.length);
  const evaluation = evaluateHeldOut(answers, held.labels, classes, true);
  const alpha = options.alpha ?? DEFAULT_ALPHA[options.activation];
  const calibration: DomainFitInput['calibration'] = options.calibrateOn
    ? { ...options.calibrateOn, memberOf: new Int32Array(options.calibrateOn.rows).fill(-1), source: 'calibrate-on' }
    : held.rows > 0
      ? { x: held.x, rows: held.rows, memberOf: held.memberOf, source: options.folds > 1 ? 'out_of_fold' : 'validation', answers }
      : { x: table.x, rows, memberOf: new Int32Array(rows).fill(-1), source: 'training' };
  const bundle = sealBundle({
    format: BUNDLE_FORMAT,
    name: options.name,
    version: options.version,
    created_at: isoSeconds(options.createdAt),
    features,
    classes,
    preprocess: fit.preprocess,
    members: networks.map(encodeNetwork),
    calibration: { temperature: evaluation.temperature, fit: evaluation.fit },
    ...servingSections({
      members: networks,
      preprocess: fit.preprocess,
      temperature: evaluation.temperature,
      table,
      memberRows: fit.members.map((m) => m.trainRows),
      calibration,
      validation: { predicted: evaluation.predicted, margins: evaluation.margins },
      options,
    }),
    training: {
      source: { kind: 'csv', data_sha256: options.dataSha256, label_column: options.labelColumn },
      rows: { total: rows, folds: options.folds, held_out: held.rows },
      seed: options.seed,
      options: {
        hidden: options.hidden,
        activation: options.activation satisfies ActivationName,
        ...(alpha !== undefined ? { alpha } : {}),
        epochs: options.epochs,
        batch_size: options.batchSize,
        learning_rate: options.learningRate,
        weight_decay: options.weightDecay,
        patience: options.patience,
        folds: options.folds,
        validation_fraction: options.validationFraction,
        balance: options.balance,
        envelope_tolerance: options.tolerance,
        review_margin: options.reviewMargin,
        detectors: [...options.detectors],
        keep_weak: options.keepWeak,
        in_domain_rate: options.inDomainRate,
      },
      calibration_networks: fit.calibrationNets.length,
      members: fit.members.map((m) => ({
        train_rows: m.trainRows.length - (options.folds > 1 ? m.earlyStoppingRows.length : 0),
        early_stopping_rows: m.earlyStoppingRows.length,
        epochs_run: m.result.epochsRun,
        best_epoch: m.result.bestEpoch,
        stopped_early: m.result.stoppedEarly,
        train_loss: m.result.trainLoss,
        early_stopping_loss: m.result.validationLoss,
      })),
      metrics: {
        held_out: evaluation.metrics,
        calibration: { temperature: evaluation.temperature, fit: evaluation.fit, bins: ECE_BINS, before: evaluation.before, after: evaluation.after },
      },
    },
  });
  return { bundle, fit, evaluation };
}
