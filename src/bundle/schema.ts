import { z } from 'zod';
import { ACTIVATIONS } from '../core/activations.js';
import { TEMPERATURE_RANGE } from '../core/calibration.js';

/** The format this version writes; version 1 is still read (and scored exactly as before). */
export const BUNDLE_FORMAT = 'plumbline-bundle/2';
export const BUNDLE_FORMAT_V1 = 'plumbline-bundle/1';
export const BUNDLE_FORMATS = [BUNDLE_FORMAT_V1, BUNDLE_FORMAT] as const;

/** Quantile levels stored per feature in the reference (docs/bundle-format.md). */
export const REFERENCE_QUANTILE_LEVELS = [0.001, 0.01, 0.05, 0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 0.95, 0.99, 0.999] as const;

const finite = z.number(); // zod 4 refuses Infinity and NaN by itself
const probability = z.number().min(0).max(1);
const count = z.number().int().min(0);
const sha256 = z.string().regex(/^[0-9a-f]{64}$/, 'must be 64 lowercase hex digits');

export const modelNameSchema = z.string().regex(/^[a-z0-9][a-z0-9._-]{0,63}$/, 'must match [a-z0-9][a-z0-9._-]{0,63}');
export const modelVersionSchema = z.string().regex(/^[A-Za-z0-9._-]{1,64}$/, 'must match [A-Za-z0-9._-]{1,64}');
// Feature and class names reach CSV headers, JSON keys and log lines: printable, short, trimmed.
const labelText = z
  .string()
  .min(1)
  .max(64)
  .regex(/^[^\s\u0000-\u001f\u007f](?:[^\u0000-\u001f\u007f]*[^\s\u0000-\u001f\u007f])?$/, 'must be 1-64 printable characters without leading or trailing spaces')
  // Names become object keys in answers; this one would set the prototype instead.
  .refine((s) => s !== '__proto__', 'must not be __proto__');

export const featureSchema = z.strictObject({
  name: labelText,
  unit: z.string().max(32),
  description: z.string().max(500),
});

export const layerSchema = z.strictObject({
  inputs: z.number().int().min(1).max(65536),
  outputs: z.number().int().min(1).max(65536),
  activation: z.enum(ACTIVATIONS),
  alpha: finite.optional(),
  weights: z.string(),
  bias: z.string(),
});

const metricsSchema = z.strictObject({
  accuracy: probability,
  macro_f1: probability,
  per_class: z.record(
    z.string(),
    z.strictObject({ precision: probability, recall: probability, f1: probability, support: count }),
  ),
  confusion: z.array(z.array(count)),
});

export const featureReferenceSchema = z.strictObject({
  name: labelText,
  min: finite,
  max: finite,
  mean: finite,
  std: finite.min(0),
  quantiles: z.array(finite),
  bin_edges: z.array(finite),
  bin_fractions: z.array(probability),
});

export const referenceSchema = z.strictObject({
  rows: count,
  quantile_levels: z.array(probability),
  features: z.array(featureReferenceSchema),
  sample: z.strictObject({
    rows: count,
    subsampled: z.boolean(),
    /** Column-major: values[j][i] is feature j of sample row i; every column has `rows` values. */
    values: z.array(z.array(finite)),
  }),
  class_prior: z.record(z.string(), probability),
  validation: z.strictObject({
    rows: count,
    predicted_fractions: z.record(z.string(), probability),
    margins: z.array(probability),
  }),
});

export const envelopeSchema = z.strictObject({
  tolerance: finite.min(0),
  low: z.array(finite),
  high: z.array(finite),
});

const rateByDetector = z.record(z.string(), probability);

export const evaluationSchema = z.strictObject({
  held_out_rows: count,
  /** Share of held-out in-domain rows each detector, and the composite, lets through. */
  pass_rate: rateByDetector,
  probes: z.array(
    z.strictObject({
      name: z.string(),
      description: z.string(),
      rows: count,
      /** Share of the probe rows each detector flags. */
      detection_rate: rateByDetector,
      /** Held-out rows against probe rows; null where a detector gives one value to all. */
      auroc: z.record(z.string(), probability.nullable()),
    }),
  ),
});

export const domainV1Schema = z.strictObject({
  review_margin: probability,
  /** Share of in-domain rows the composite flag is calibrated to let through. */
  target_in_domain_rate: probability,
  /** The rows the thresholds were calibrated on and the pass rate measured there: the baseline false-alarm rate. */
  held_out: z.strictObject({
    source: z.enum(['validation', 'calibrate-on', 'training']),
    rows: count,
    in_domain_rate: probability,
    false_alarm_rate: probability,
  }),
  envelope: envelopeSchema,
  input_mahalanobis: z
    .strictObject({
      mean: z.array(finite),
      /** Lower triangle of the covariance's Cholesky factor, row by row: d(d+1)/2 values. */
      cholesky: z.array(finite),
      shrinkage: probability,
      threshold: finite.min(0),
    })
    .optional(),
  feature_mahalanobis: z
    .strictObject({
      class_means: z.array(z.array(finite)),
      cholesky: z.array(finite),
      shrinkage: probability,
      threshold: finite.min(0),
    })
    .optional(),
  energy: z.strictObject({ threshold: finite }).optional(),
  evaluation: evaluationSchema,
});

const trainingSourceSchema = z.discriminatedUnion('kind', [
  // Trained here, on a CSV file.
  z.strictObject({
    kind: z.literal('csv'),
    data_sha256: sha256,
    label_column: z.string(),
  }),
  // Trained elsewhere and imported from ONNX; the CSV file gave the reference and the detectors.
  z.strictObject({
    kind: z.literal('onnx'),
    onnx_sha256: sha256,
    onnx_file: z.string().max(256),
    producer: z.string().max(256),
    opset: z.number().int().min(1),
    data_sha256: sha256,
    label_column: z.string(),
  }),
]);

export const trainingV1Schema = z.strictObject({
  source: trainingSourceSchema,
  rows: z.strictObject({ total: count, train: count, validation: count }),
  seed: count,
  options: z.record(z.string(), z.unknown()),
  epochs_run: count,
  best_epoch: count,
  stopped_early: z.boolean(),
  metrics: z.strictObject({
    train_loss: finite,
    validation_loss: finite.nullable(),
    validation: metricsSchema.nullable(),
    calibration: z.strictObject({
      temperature: finite.positive(),
      bins: z.number().int().positive(),
      ece_before: finite.nullable(),
      ece_after: finite.nullable(),
    }),
  }),
});

const layersSchema = z.array(layerSchema).min(1).max(64);
// scale >= 1e-30 keeps (x - mean) / scale finite for every accepted input (|x| <= 1e15).
const preprocessSchema = z.strictObject({ mean: z.array(finite), scale: z.array(finite.min(1e-30)) });
const temperatureSchema = finite.min(TEMPERATURE_RANGE.min).max(TEMPERATURE_RANGE.max);

export const bundleV1Schema = z.strictObject({
  format: z.literal(BUNDLE_FORMAT_V1),
  name: modelNameSchema,
  version: modelVersionSchema,
  created_at: z.iso.datetime(),
  features: z.array(featureSchema).min(1).max(4096),
  classes: z.array(labelText).min(2).max(1000),
  preprocess: preprocessSchema,
  network: z.strictObject({ layers: layersSchema }),
  calibration: z.strictObject({ temperature: temperatureSchema }),
  domain: domainV1Schema,
  reference: referenceSchema,
  training: trainingV1Schema,
  sha256,
});

// --- version 2: an ensemble of fold networks, a jointly calibrated flag, honest small-sample figures ---

/** Lower triangle of a covariance's Cholesky factor, row by row: n(n+1)/2 values. */
const gaussianSchema = z.strictObject({ mean: z.array(finite), cholesky: z.array(finite), shrinkage: probability });
const classGaussianSchema = z.strictObject({ class_means: z.array(z.array(finite)), cholesky: z.array(finite), shrinkage: probability });

export const calibrationFits = ['fitted', 'separable', 'flat', 'not_fitted'] as const;

export const domainSchema = z.strictObject({
  review_margin: probability,
  /** Share of in-domain rows the composite flag was asked to let through. */
  target_in_domain_rate: probability,
  /** The rows the thresholds were calibrated on, and what they support. */
  held_out: z.strictObject({
    source: z.enum(['out_of_fold', 'validation', 'calibrate-on', 'training']),
    rows: count,
    /** The level calibrated to: the target, or the most the rows support where they cannot support it (n / (n + 1) for one detector, #{worst rank <= n - 1} / (n + 1) for several; src/core/domain/calibrate.ts). */
    level: probability,
    /** Leave-one-out share of the rows the flag passes, and its complement. */
    in_domain_rate: probability,
    false_alarm_rate: probability,
    /** Clopper–Pearson interval of the false-alarm rate on these rows. */
    false_alarm_ci: z.strictObject({ low: probability, high: probability, confidence: probability }),
  }),
  /**
   * The served envelope, and the training range it widens (tolerance 0): answers name every
   * feature beyond that range; the envelope check votes only past the tolerance.
   */
  envelope: envelopeSchema.extend({ range: z.strictObject({ low: z.array(finite), high: z.array(finite) }) }),
  /** Per member, on the rows its network trained on; one threshold for all members. */
  input_mahalanobis: z.strictObject({ threshold: finite.min(0), members: z.array(gaussianSchema).min(1) }).optional(),
  feature_mahalanobis: z.strictObject({ threshold: finite.min(0), members: z.array(classGaussianSchema).min(1) }).optional(),
  energy: z.strictObject({ threshold: finite }).optional(),
  disagreement: z.strictObject({ threshold: finite.min(0) }).optional(),
  /** Detectors asked for that do not vote, and why. */
  left_out: z.array(z.strictObject({ detector: z.string(), reason: z.string().max(500) })),
  evaluation: evaluationSchema,
});

const lossSummary = z.strictObject({ log_loss: finite.min(0), brier: finite.min(0), ece: finite.min(0) });

export const trainingSchema = z.strictObject({
  source: trainingSourceSchema,
  /** folds: the K of cross-fitting (1: one network and a hold-out); held_out: rows the metrics and calibration rest on. */
  rows: z.strictObject({ total: count, folds: z.number().int().min(1).max(32), held_out: count }),
  seed: count,
  options: z.record(z.string(), z.unknown()),
  /** Networks trained only to calibrate the ensemble out of fold (one per pair of folds); not served. */
  calibration_networks: count,
  /** One per network served, trained here; empty for an imported one. */
  members: z.array(
    z.strictObject({
      train_rows: count,
      early_stopping_rows: count,
      epochs_run: count,
      best_epoch: count,
      stopped_early: z.boolean(),
      train_loss: finite,
      early_stopping_loss: finite.nullable(),
    }),
  ),
  metrics: z.strictObject({
    /** On the held-out rows: out of fold, each row answered by networks that never saw it (the K - 1 calibration networks of its fold for K >= 3, the member without its fold for K = 2). */
    held_out: metricsSchema.nullable(),
    calibration: z.strictObject({
      temperature: finite.positive(),
      fit: z.enum(calibrationFits),
      bins: z.number().int().positive(),
      before: lossSummary.nullable(),
      after: lossSummary.nullable(),
    }),
  }),
});

export const bundleSchema = z.strictObject({
  format: z.literal(BUNDLE_FORMAT),
  name: modelNameSchema,
  version: modelVersionSchema,
  created_at: z.iso.datetime(),
  features: z.array(featureSchema).min(1).max(4096),
  classes: z.array(labelText).min(2).max(1000),
  preprocess: preprocessSchema,
  /** The networks that answer together: the mean of their calibrated probabilities. */
  members: z.array(z.strictObject({ layers: layersSchema })).min(1).max(32),
  calibration: z.strictObject({ temperature: temperatureSchema, fit: z.enum(calibrationFits) }),
  domain: domainSchema,
  reference: referenceSchema,
  training: trainingSchema,
  sha256,
});

/** What this version writes. */
export type BundleFile = z.infer<typeof bundleSchema>;
export type BundleFileV1 = z.infer<typeof bundleV1Schema>;
/** What it reads. */
export type AnyBundleFile = BundleFile | BundleFileV1;
export type BundleBody = Omit<BundleFile, 'sha256'>;
export type FeatureInfo = z.infer<typeof featureSchema>;
export type Reference = z.infer<typeof referenceSchema>;
export type Domain = z.infer<typeof domainSchema>;
export type DomainV1 = z.infer<typeof domainV1Schema>;
export type Evaluation = z.infer<typeof evaluationSchema>;
export type Training = z.infer<typeof trainingSchema>;
export type Metrics = z.infer<typeof metricsSchema>;
export type LayerJson = z.infer<typeof layerSchema>;
