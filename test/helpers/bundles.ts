import { OPTIONAL_DETECTORS } from '../../src/bundle/domain-fit.js';
import { type LabelledTable, type BundleOptions, DOMAIN_DEFAULTS, trainBundle } from '../../src/bundle/train-bundle.js';
import { DEFAULT_TRAIN_OPTIONS } from '../../src/core/train.js';
import { irisRows, IRIS_FEATURES } from './datasets.js';

export const IRIS_UNITS = 'cm';

export function irisTable(): LabelledTable {
  const rows = irisRows();
  const classes = [...new Set(rows.map((r) => r.species))].sort();
  return {
    features: IRIS_FEATURES.map((name) => ({ name, unit: IRIS_UNITS, description: `${name.replace('_', ' ')} of the flower` })),
    x: Float64Array.from(rows.flatMap((r) => r.values)),
    rows: rows.length,
    labels: Int32Array.from(rows, (r) => classes.indexOf(r.species)),
    classes,
  };
}

export function bundleOptions(overrides: Partial<BundleOptions> = {}): BundleOptions {
  return {
    ...DEFAULT_TRAIN_OPTIONS,
    epochs: 60,
    name: 'iris',
    version: '1',
    createdAt: new Date('2026-01-02T03:04:05Z'),
    folds: 5,
    validationFraction: 0.2,
    balance: false,
    keepWeak: false,
    tolerance: DOMAIN_DEFAULTS.tolerance,
    reviewMargin: DOMAIN_DEFAULTS.reviewMargin,
    detectors: [...OPTIONAL_DETECTORS],
    inDomainRate: DOMAIN_DEFAULTS.inDomainRate,
    dataSha256: '0'.repeat(64),
    labelColumn: 'species',
    ...overrides,
  };
}

/** A small trained Iris bundle for tests that need a real one. */
export function irisBundle(overrides: Partial<BundleOptions> = {}) {
  return trainBundle(irisTable(), bundleOptions(overrides));
}
