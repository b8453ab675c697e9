import { auroc } from '../core/domain/auroc.js';
import { calibrateComposite, conformalThreshold, leaveOneOutPasses } from '../core/domain/calibrate.js';
import { type BatchView, DETECTORS, type DetectorName, type DomainModels, scoreDomain } from '../core/domain/detectors.js';
import { envelopeFromRange, quantileRange, rangeExceedance } from '../core/domain/envelope.js';
import { fitClassConditional, fitMahalanobis } from '../core/domain/mahalanobis.js';
import { makeProbes } from '../core/domain/probes.js';
import { type Network, forward } from '../core/network.js';
import type { Rng } from '../core/rng.js';
import { softmaxRowsInto, topTwo } from '../core/softmax.js';
import { type Standardizer, standardize } from '../core/standardize.js';
import { packLower } from './domain-codec.js';
import type { Domain, Evaluation } from './schema.js';

/** Detectors that may be switched off; the envelope always runs, since it names the features. */
export const OPTIONAL_DETECTORS = DETECTORS.filter((d) => d !== 'envelope');

export const DOMAIN_DEFAULTS = { tolerance: 0.1, reviewMargin: 0.2, inDomainRate: 0.99, probeRows: 500 } as const;

/** The widest envelope calibration may choose: a whole range beyond each end of the quantile range. */
export const MAX_TOLERANCE = 1;

export interface DomainFitInput {
  network: Network;
  preprocess: Standardizer;
  temperature: number;
  classes: number;
  /** The training split, raw units, with class indices. */
  train: { x: Float64Array; labels: Int32Array; rows: number };
  /** In-domain rows the thresholds are calibrated on, raw units. */
  heldOut: { x: Float64Array; rows: number; source: Domain['held_out']['source'] };
  detectors: readonly DetectorName[];
  targetRate: number;
  tolerance: number;
  reviewMargin: number;
  probeRows: number;
}

/** Forward pass of raw rows, as the detectors see them. */
export function batchView(net: Network, preprocess: Standardizer, raw: Float64Array, rows: number, classes: number): BatchView {
  const standardized = standardize(preprocess, raw, rows);
  const { logits, hidden } = forward(net, standardized, rows);
  return { rows, raw, standardized, hidden, logits, classes };
}

/** 1 - the largest softmax probability: the baseline every paper on this compares against. */
function maxProbabilityScores(view: BatchView, temperature: number): Float64Array {
  const p = new Float64Array(view.rows * view.classes);
  softmaxRowsInto(Float64Array.from(view.logits), view.rows, view.classes, temperature, p);
  return Float64Array.from({ length: view.rows }, (_, r) => 1 - topTwo(p, r * view.classes, view.classes).top);
}

const round6 = (v: number): number => Number(v.toFixed(6));

/**
 * Fits the enabled detectors on the training split, calibrates their thresholds on the held-out
 * rows so that the composite flag lets the target share through, measures that share (the
 * baseline false-alarm rate), and evaluates every detector on generated out-of-domain probes.
 */
export function fitDomain(input: DomainFitInput, rng: Rng): Domain {
  const { network, preprocess, temperature, classes, train, heldOut } = input;
  const d = preprocess.mean.length;
  const enabled = new Set<DetectorName>(['envelope', ...input.detectors]);
  // The envelope's tolerance: the one asked for, or wider when the held-out rows need it to keep
  // within half the false-alarm budget (split-conformal on their exceedance of the range). A few
  // hundred training rows leave the 0.1%/99.9% quantiles near the extremes, and with many
  // features some new row is nearly always just beyond one of them.
  const range = quantileRange(train.x, train.rows, d);
  const exceedance = Float64Array.from({ length: heldOut.rows }, (_, r) => rangeExceedance(range, heldOut.x, r * d));
  const envelopeLevel = 1 - (1 - input.targetRate) / 2;
  const tolerance = Math.min(MAX_TOLERANCE, Math.max(input.tolerance, conformalThreshold(exceedance, envelopeLevel)));
  const models: DomainModels = { envelope: envelopeFromRange(range, tolerance) };

  const trainView = batchView(network, preprocess, train.x, train.rows, classes);
  if (enabled.has('input_mahalanobis')) models.input_mahalanobis = fitMahalanobis(Float64Array.from(trainView.standardized), train.rows, d);
  const width = network.layers.length >= 2 ? (network.layers.at(-1)?.inputs ?? 0) : 0;
  if (enabled.has('feature_mahalanobis') && width > 0) {
    models.feature_mahalanobis = fitClassConditional(Float64Array.from(trainView.hidden), train.labels, train.rows, width, classes);
  }
  if (enabled.has('energy')) models.energy = { temperature };

  // Thresholds: one shared level for the calibrated detectors, chosen with the envelope's fixed
  // outcome counted, so that the composite meets the target on the held-out rows.
  const heldView = batchView(network, preprocess, heldOut.x, heldOut.rows, classes);
  const held = scoreDomain(models, heldView);
  const calibrated = OPTIONAL_DETECTORS.filter((n) => held.scores[n] !== undefined);
  const cal = calibrateComposite(
    calibrated.map((n) => held.scores[n] as Float64Array),
    heldOut.rows,
    input.targetRate,
    (r) => (held.outside[r] as number[]).length === 0,
  );
  const thresholds = { envelope: 0 } as Record<DetectorName, number>;
  calibrated.forEach((n, i) => (thresholds[n] = cal.thresholds[i] as number));

  // The pass rates reported are leave-one-out: each held-out row is checked against thresholds
  // calibrated without it, so that the stored false-alarm rate is what new rows will see, not
  // the flattering rate of the rows that set the thresholds.
  const heldMsp = maxProbabilityScores(heldView, temperature);
  const passes: Record<string, boolean[]> = {};
  const envelopeLoo = leaveOneOutPasses(exceedance, envelopeLevel);
  passes.envelope = Array.from({ length: heldOut.rows }, (_, r) => (held.outside[r] as number[]).length === 0 && ((exceedance[r] as number) <= input.tolerance || (envelopeLoo[r] as boolean)));
  for (const n of calibrated) passes[n] = leaveOneOutPasses(held.scores[n] as Float64Array, cal.level);
  passes.composite = Array.from({ length: heldOut.rows }, (_, r) => ['envelope', ...calibrated].every((n) => (passes[n] as boolean[])[r]));
  passes.max_probability = leaveOneOutPasses(heldMsp, input.targetRate);
  const share = (b: boolean[], want: boolean): number => (b.length === 0 ? 0 : round6(b.filter((v) => v === want).length / b.length));
  const inDomainRate = share(passes.composite, true);

  const domain: Domain = {
    review_margin: input.reviewMargin,
    target_in_domain_rate: input.targetRate,
    held_out: { source: heldOut.source, rows: heldOut.rows, in_domain_rate: inDomainRate, false_alarm_rate: round6(1 - inDomainRate) },
    envelope: models.envelope,
    ...(models.input_mahalanobis
      ? {
          input_mahalanobis: {
            mean: Array.from(models.input_mahalanobis.mean),
            cholesky: packLower(models.input_mahalanobis.cholesky, d),
            shrinkage: models.input_mahalanobis.shrinkage,
            threshold: thresholds.input_mahalanobis,
          },
        }
      : {}),
    ...(models.feature_mahalanobis
      ? {
          feature_mahalanobis: {
            class_means: Array.from({ length: classes }, (_, k) => Array.from((models.feature_mahalanobis as { means: Float64Array }).means.subarray(k * width, (k + 1) * width))),
            cholesky: packLower(models.feature_mahalanobis.cholesky, width),
            shrinkage: models.feature_mahalanobis.shrinkage,
            threshold: thresholds.feature_mahalanobis,
          },
        }
      : {}),
    ...(models.energy ? { energy: { threshold: thresholds.energy } } : {}),
    evaluation: { held_out_rows: 0, pass_rate: {}, probes: [] },
  };

  // Evaluation: the baseline maximum softmax probability is calibrated to the same target alone.
  const mspThreshold = conformalThreshold(heldMsp, input.targetRate);
  const active = ['envelope', ...calibrated] as DetectorName[];
  const flags = (s: ReturnType<typeof scoreDomain>, msp: Float64Array, rows: number) => {
    const byDetector: Record<string, boolean[]> = {};
    for (const n of active) byDetector[n] = Array.from({ length: rows }, (_, r) => ((s.scores[n] as Float64Array)[r] as number) > (thresholds[n] as number));
    byDetector.composite = Array.from({ length: rows }, (_, r) => active.some((n) => (byDetector[n] as boolean[])[r]));
    byDetector.max_probability = Array.from(msp, (v) => v > mspThreshold);
    return byDetector;
  };
  const evaluation: Evaluation = {
    held_out_rows: heldOut.rows,
    pass_rate: Object.fromEntries(Object.entries(passes).map(([n, b]) => [n, share(b, true)])),
    probes: [],
  };

  const probes = makeProbes(
    {
      heldOut: heldOut.x,
      heldOutRows: heldOut.rows,
      dim: d,
      rangeLow: range.low,
      rangeHigh: range.high,
      envelopeLow: models.envelope.low,
      envelopeHigh: models.envelope.high,
      rowsPerProbe: input.probeRows,
    },
    rng,
  );
  for (const probe of probes) {
    const view = batchView(network, preprocess, probe.x, probe.rows, classes);
    const s = scoreDomain(models, view);
    const msp = maxProbabilityScores(view, temperature);
    const f = flags(s, msp, probe.rows);
    const aurocOf = (neg: ArrayLike<number>, pos: ArrayLike<number>): number | null => {
      const all = [...Array.from(neg), ...Array.from(pos)];
      return all.every((v) => v === all[0]) ? null : round6(auroc(neg, pos));
    };
    evaluation.probes.push({
      name: probe.name,
      description: probe.description,
      rows: probe.rows,
      detection_rate: Object.fromEntries(Object.entries(f).map(([n, b]) => [n, share(b, true)])),
      auroc: {
        ...Object.fromEntries(active.map((n) => [n, aurocOf(held.scores[n] as Float64Array, s.scores[n] as Float64Array)])),
        max_probability: aurocOf(heldMsp, msp),
      },
    });
  }
  domain.evaluation = evaluation;
  return domain;
}
