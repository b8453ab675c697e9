import { z } from 'zod';
import { ACTIVATIONS } from '../core/activations.js';
import { TEMPERATURE_RANGE } from '../core/calibration.js';

export const BUNDLE_FORMAT = 'plumbline-bundle/1';

/** Quantile levels stored per feature in the reference (DESIGN.md, bundle reference). */
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

export const domainSchema = z.strictObject({
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

export const trainingSchema = z.strictObject({
  source: z.discriminatedUnion('kind', [
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
  ]),
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

export const bundleSchema = z.strictObject({
  format: z.literal(BUNDLE_FORMAT),
  name: modelNameSchema,
  version: modelVersionSchema,
  created_at: z.iso.datetime(),
  features: z.array(featureSchema).min(1).max(4096),
  classes: z.array(labelText).min(2).max(1000),
  // scale >= 1e-30 keeps (x - mean) / scale finite for every accepted input (|x| <= 1e15).
  preprocess: z.strictObject({ mean: z.array(finite), scale: z.array(finite.min(1e-30)) }),
  network: z.strictObject({ layers: z.array(layerSchema).min(1).max(64) }),
  calibration: z.strictObject({ temperature: finite.min(TEMPERATURE_RANGE.min).max(TEMPERATURE_RANGE.max) }),
  domain: domainSchema,
  reference: referenceSchema,
  training: trainingSchema,
  sha256,
});

export type BundleFile = z.infer<typeof bundleSchema>;
export type BundleBody = Omit<BundleFile, 'sha256'>;
export type FeatureInfo = z.infer<typeof featureSchema>;
export type Reference = z.infer<typeof referenceSchema>;
export type Domain = z.infer<typeof domainSchema>;
export type Evaluation = z.infer<typeof evaluationSchema>;
export type Training = z.infer<typeof trainingSchema>;
export type Metrics = z.infer<typeof metricsSchema>;
