import { copyFileSync, mkdirSync } from 'node:fs';
import { join } from 'node:path';
import { trainBundle } from '../../src/bundle/train-bundle.js';
import { writeBundle } from '../../src/bundle/write.js';
import { DEFAULT_TRAIN_OPTIONS } from '../../src/core/train.js';
import { createRng } from '../../src/core/rng.js';
import { DOMAIN_DEFAULTS } from '../../src/bundle/domain-fit.js';
import { DEMO_DATA_DIR } from '../../src/demo/paths.js';

/** The network shapes the benchmarks compare: the demo's, and two wider ones. */
export const SHAPES = {
  demo: { features: 10, hidden: [32, 32], classes: 5 },
  mid: { features: 10, hidden: [64, 64], classes: 5 },
  wide: { features: 32, hidden: [256, 256], classes: 10 },
} as const;
export type ShapeName = keyof typeof SHAPES;

export const shapeLabel = (s: ShapeName): string => {
  const { features, hidden, classes } = SHAPES[s];
  return [features, ...hidden, classes].join('-');
};

/**
 * A models directory holding one bundle of the shape, named "bench". The demo shape is the demo
 * bundle itself; the others are trained for two epochs on random rows (only their size matters
 * here: these are speed figures, not a check of what the network learns).
 */
export async function benchModels(dir: string, shape: ShapeName): Promise<{ dir: string; model: string; features: number }> {
  const models = join(dir, `models-${shape}`);
  mkdirSync(models, { recursive: true });
  if (shape === 'demo') {
    copyFileSync(join(DEMO_DATA_DIR, 'models', 'moulding-quality.bundle.json'), join(models, 'moulding-quality.bundle.json'));
    return { dir: models, model: 'moulding-quality', features: 10 };
  }
  const { features, hidden, classes } = SHAPES[shape];
  const rng = createRng(42);
  const rows = 3000;
  const x = Float64Array.from({ length: rows * features }, () => rng.next() * 2 - 1);
  const labels = Int32Array.from({ length: rows }, (_, r) => Math.floor(((x[r * features] as number) + 1) * 0.5 * classes) % classes);
  const { bundle } = trainBundle(
    { features: Array.from({ length: features }, (_, j) => ({ name: `f${j}`, unit: 'u', description: '' })), x, rows, labels, classes: Array.from({ length: classes }, (_, k) => `c${k}`) },
    {
      ...DEFAULT_TRAIN_OPTIONS,
      hidden: [...hidden],
      epochs: 2,
      name: 'bench',
      version: shape,
      createdAt: new Date('2026-12-01T00:00:00Z'),
      // Five networks, as train makes by default: the scorer runs every member.
      folds: 5,
      validationFraction: 0.2,
      balance: false,
      keepWeak: true,
      tolerance: DOMAIN_DEFAULTS.tolerance,
      reviewMargin: DOMAIN_DEFAULTS.reviewMargin,
      detectors: ['input_mahalanobis', 'feature_mahalanobis', 'energy'],
      inDomainRate: DOMAIN_DEFAULTS.inDomainRate,
      dataSha256: '0'.repeat(64),
      labelColumn: 'label',
    },
  );
  await writeBundle(join(models, 'bench.bundle.json'), bundle);
  return { dir: models, model: 'bench', features };
}

/** A shot from the demo's normal production (demo-data/traffic-normal.csv). */
export const DEMO_SHOT = [232.1, 53.8, 923, 478, 3.48, 14.18, 102, 5.4, 23.7, 47.93];

/** A feature vector of the shape, inside its data's range. */
export const vector = (shape: ShapeName): number[] => (shape === 'demo' ? DEMO_SHOT : Array.from({ length: SHAPES[shape].features }, (_, j) => ((j * 37) % 17) / 17 - 0.5));
