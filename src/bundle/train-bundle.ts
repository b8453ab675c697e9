import { type ActivationName, DEFAULT_ALPHA } from '../core/activations.js';
import type { DetectorName } from '../core/domain/detectors.js';
import { type Network, roundToFloat32 } from '../core/network.js';
import { createRng, deriveSeed } from '../core/rng.js';
import { stratifiedSplit, take, takeRows } from '../core/split.js';
import { type Standardizer, fitStandardizer, standardize } from '../core/standardize.js';
import { type EpochReport, type TrainOptions, type TrainResult, classWeightsFor, trainClassifier } from '../core/train.js';
import { DOMAIN_DEFAULTS, type DomainFitInput, fitDomain } from './domain-fit.js';
import { ECE_BINS, type Evaluation, evaluateHeldOut } from './evaluate.js';
import { encodeNetwork } from './network-codec.js';
import { fitReference } from './reference.js';
import { BUNDLE_FORMAT, type BundleFile, type FeatureInfo } from './schema.js';
import { sealBundle } from './verify.js';

export { DOMAIN_DEFAULTS } from './domain-fit.js';

export interface LabelledTable {
  features: FeatureInfo[];
  /** rows x features, row-major, in the units of the features. */
  x: Float64Array;
  rows: number;
  /** Class index of each row into `classes`. */
  labels: Int32Array;
  classes: string[];
}

export interface BundleOptions extends TrainOptions {
  name: string;
  version: string;
  createdAt: Date;
  validationFraction: number;
  balance: boolean;
  tolerance: number;
  reviewMargin: number;
  /** Detectors besides the envelope that vote on the flag. */
  detectors: readonly DetectorName[];
  /** Share of held-out in-domain rows the flag is calibrated to pass. */
  inDomainRate: number;
  /** Held-out in-domain rows (raw units) to calibrate on instead of the validation split. */
  calibrateOn?: { x: Float64Array; rows: number };
  dataSha256: string;
  labelColumn: string;
}

export interface TrainedBundle {
  bundle: BundleFile;
  result: TrainResult;
  evaluation: Evaluation;
}

/** ISO 8601 in whole seconds, as the bundle stores created_at. */
export function isoSeconds(date: Date): string {
  return date.toISOString().replace(/\.\d{3}Z$/, 'Z');
}

export interface ServingInput {
  network: Network;
  preprocess: Standardizer;
  temperature: number;
  /** Every row of the data, for the reference statistics. */
  table: LabelledTable;
  /** The rows the detectors are fitted on (the training split). */
  domainTrain: { x: Float64Array; labels: Int32Array; rows: number };
  /** In-domain rows the flag is calibrated on. */
  heldOut: DomainFitInput['heldOut'];
  /** Predicted classes and margins on the evaluated rows, the reference for drift reports. */
  validation: { predicted: Int32Array; margins: Float64Array };
  options: Pick<BundleOptions, 'detectors' | 'inDomainRate' | 'tolerance' | 'reviewMargin' | 'seed'>;
}

/**
 * The parts of a bundle that serve and watch a network, whoever trained it: the domain flag
 * (envelope and detectors, calibrated on held-out rows) and the reference for drift reports.
 */
export function servingSections(input: ServingInput): Pick<BundleFile, 'domain' | 'reference'> {
  const { network, preprocess, table, options } = input;
  return {
    domain: fitDomain(
      {
        network,
        preprocess,
        temperature: input.temperature,
        classes: table.classes.length,
        train: input.domainTrain,
        heldOut: input.heldOut,
        detectors: options.detectors,
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

/**
 * Trains a network on the table and seals a bundle: stratified split, standardisation fitted on
 * the training rows, training, rounding to float32 (what is served is what was measured), then
 * temperature, metrics, envelope and reference. Deterministic for given data, options and seed.
 */
export function trainBundle(table: LabelledTable, options: BundleOptions, onEpoch?: (r: EpochReport) => void): TrainedBundle {
  const { x, rows, labels, classes, features } = table;
  const d = features.length;
  const K = classes.length;
  const split = stratifiedSplit(labels, K, options.validationFraction, createRng(deriveSeed(options.seed, 1)));
  const trainX = takeRows(x, d, split.train);
  const trainY = take(labels, split.train);
  const valX = takeRows(x, d, split.validation);
  const valY = take(labels, split.validation);
  const preprocess = fitStandardizer(trainX, trainY.length, d);
  const weights = classWeightsFor(trainY, K, options.balance);
  const result = trainClassifier(
    { x: standardize(preprocess, trainX, trainY.length), labels: trainY, rows: trainY.length },
    valY.length > 0 ? { x: standardize(preprocess, valX, valY.length), labels: valY, rows: valY.length } : null,
    K,
    weights,
    options,
    onEpoch,
  );
  const network = roundToFloat32(result.network);
  const evaluation = evaluateHeldOut(network, preprocess, valX, valY, classes, true);
  const alpha = options.alpha ?? DEFAULT_ALPHA[options.activation];
  const bundle = sealBundle({
    format: BUNDLE_FORMAT,
    name: options.name,
    version: options.version,
    created_at: isoSeconds(options.createdAt),
    features,
    classes,
    preprocess,
    network: encodeNetwork(network),
    calibration: { temperature: evaluation.temperature },
    ...servingSections({
      network,
      preprocess,
      temperature: evaluation.temperature,
      table,
      domainTrain: { x: trainX, labels: trainY, rows: trainY.length },
      heldOut: options.calibrateOn
        ? { ...options.calibrateOn, source: 'calibrate-on' }
        : valY.length > 0
          ? { x: valX, rows: valY.length, source: 'validation' }
          : { x: trainX, rows: trainY.length, source: 'training' },
      validation: { predicted: evaluation.predicted, margins: evaluation.margins },
      options,
    }),
    training: {
      source: { kind: 'csv', data_sha256: options.dataSha256, label_column: options.labelColumn },
      rows: { total: rows, train: split.train.length, validation: split.validation.length },
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
        validation_fraction: options.validationFraction,
        balance: options.balance,
        envelope_tolerance: options.tolerance,
        review_margin: options.reviewMargin,
        detectors: [...options.detectors],
        in_domain_rate: options.inDomainRate,
      },
      epochs_run: result.epochsRun,
      best_epoch: result.bestEpoch,
      stopped_early: result.stoppedEarly,
      metrics: {
        train_loss: result.trainLoss,
        validation_loss: result.validationLoss,
        validation: evaluation.metrics,
        calibration: {
          temperature: evaluation.temperature,
          bins: ECE_BINS,
          ece_before: evaluation.eceBefore,
          ece_after: evaluation.eceAfter,
        },
      },
    },
  });
  return { bundle, result, evaluation };
}
