import { binIndex, column, meanAndStd, quantileSorted, sortedCopy } from '../core/describe.js';
import { type Rng, shuffleInPlace } from '../core/rng.js';
import { REFERENCE_QUANTILE_LEVELS, type Reference } from './schema.js';

/** Rows kept verbatim as the reference sample for two-sample tests (docs/bundle-format.md). */
export const REFERENCE_SAMPLE_MAX = 10_000;

const DECILE_LEVELS = [0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9];

export interface ReferenceInput {
  x: Float64Array;
  rows: number;
  featureNames: string[];
  labels: Int32Array;
  classes: string[];
  validation: { predicted: Int32Array; margins: Float64Array };
}

/**
 * The training-distribution summary that drift reports compare against: per feature the moments,
 * quantiles and decile bins (edges deduplicated, so a feature with ties has fewer bins, none
 * empty), a verbatim sample of up to REFERENCE_SAMPLE_MAX rows (a seeded uniform subsample above
 * that), the class prior, and the predictions on the validation split.
 */
export function fitReference(input: ReferenceInput, rng: Rng): Reference {
  const { x, rows, featureNames, classes } = input;
  const cols = featureNames.length;
  const features = featureNames.map((name, j) => {
    const values = column(x, rows, cols, j);
    const sorted = sortedCopy(values);
    const { mean, std } = meanAndStd(values);
    // Edges are data values (the inverse empirical CDF, Hyndman & Fan definition 1), so that each
    // bin (e[i-1], e[i]] holds at least e[i] itself, and an edge at the maximum is dropped so the
    // top bin is not empty either: no empty bin, even for a discrete feature.
    const max = sorted[rows - 1] as number;
    const edges = [...new Set(DECILE_LEVELS.map((p) => sorted[Math.max(0, Math.ceil(rows * p) - 1)] as number))].filter((e) => e < max);
    const counts = new Array<number>(edges.length + 1).fill(0);
    for (let i = 0; i < rows; i++) {
      const b = binIndex(edges, values[i] as number);
      counts[b] = (counts[b] as number) + 1;
    }
    return {
      name,
      min: sorted[0] as number,
      max: sorted[rows - 1] as number,
      mean,
      std,
      quantiles: REFERENCE_QUANTILE_LEVELS.map((p) => quantileSorted(sorted, p)),
      bin_edges: edges,
      bin_fractions: counts.map((c) => c / rows),
    };
  });

  let sampleRows = Array.from({ length: rows }, (_, i) => i);
  const subsampled = rows > REFERENCE_SAMPLE_MAX;
  if (subsampled) sampleRows = shuffleInPlace(sampleRows, rng).slice(0, REFERENCE_SAMPLE_MAX).sort((a, b) => a - b);
  const values = featureNames.map((_, j) => sampleRows.map((r) => x[r * cols + j] as number));

  return {
    rows,
    quantile_levels: [...REFERENCE_QUANTILE_LEVELS],
    features,
    sample: { rows: sampleRows.length, subsampled, values },
    class_prior: fractionsByClass(input.labels, classes),
    validation: {
      rows: input.validation.predicted.length,
      predicted_fractions: fractionsByClass(input.validation.predicted, classes),
      margins: Array.from(input.validation.margins),
    },
  };
}

export function fractionsByClass(indices: ArrayLike<number>, classes: string[]): Record<string, number> {
  const counts = new Array<number>(classes.length).fill(0);
  for (let i = 0; i < indices.length; i++) counts[indices[i] as number] = (counts[indices[i] as number] as number) + 1;
  const n = indices.length;
  return Object.fromEntries(classes.map((c, k) => [c, n > 0 ? (counts[k] as number) / n : 0]));
}
