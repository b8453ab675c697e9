import { describe, expect, it } from 'vitest';
import { createScorer } from '../../src/bundle/scorer.js';
import { type LabelledTable, trainBundle } from '../../src/bundle/train-bundle.js';
import { parseBundle } from '../../src/bundle/verify.js';
import { serializeBundle } from '../../src/bundle/write.js';
import { DETECTORS } from '../../src/core/domain/detectors.js';
import { createRng } from '../../src/core/rng.js';
import { binomialUpperTail } from '../../src/core/stats/proportion.js';
import { bundleOptions } from '../helpers/bundles.js';

// The conformal guarantee (Vovk, Gammerman & Shafer 2005): a threshold set at the right rank of n
// exchangeable calibration scores passes a fresh exchangeable row with probability at least the
// level, and at most level + 1/(n + 1) for one score. Here the flag is the union of several
// detectors calibrated jointly on out-of-fold rows, so the upper end allows one rank per voting
// detector. Each seed draws a new training set of Gaussian classes, trains a bundle on it and
// scores ONE fresh draw from the same classes: the number of fresh rows passed over S seeds is
// then Binomial(S, p) with p the marginal pass probability, and the bounds below are that
// binomial's 0.1% and 99.9% points (the binomial tail from src/core/stats/proportion.ts, itself
// tested against published tables). Levels can differ between seeds (the detectors that vote
// can); a sum of Bernoulli trials is no more spread than the binomial of their mean probability
// (Hoeffding 1956, from memory), so the bounds use the mean.
//
// The networks are small and trained briefly: the guarantee rests on the ranks, not on the fit.
const D = 4;
const CLASSES = ['a', 'b', 'c'];

function gaussianClasses(seed: number, rows: number): { x: Float64Array; labels: Int32Array } {
  const rng = createRng(seed);
  const x = new Float64Array(rows * D);
  const labels = new Int32Array(rows);
  for (let i = 0; i < rows; i++) {
    const c = rng.int(CLASSES.length);
    labels[i] = c;
    // class c sits two standard deviations out along axis c; feature 3 is noise in every class
    for (let j = 0; j < D; j++) x[i * D + j] = (j === c ? 2 : 0) + rng.normal();
  }
  return { x, labels };
}

/** Smallest k with P(X <= k) >= q, X ~ Binomial(n, p). */
function binomialQuantile(q: number, n: number, p: number): number {
  for (let k = 0; k <= n; k++) if (1 - binomialUpperTail(k + 1, n, p) >= q) return k;
  return n;
}

interface Run {
  passed: number;
  seeds: number;
  meanLevel: number;
  meanUpper: number;
  levels: Set<number>;
}

function run(trainingRows: number, seeds: number, target: number, epochs: number): Run {
  let passed = 0;
  let levels = 0;
  let uppers = 0;
  const seen = new Set<number>();
  for (let s = 1; s <= seeds; s++) {
    const train = gaussianClasses(10_000 * trainingRows + s, trainingRows);
    const table: LabelledTable = {
      features: Array.from({ length: D }, (_, j) => ({ name: `x${j}`, unit: 'u', description: `coordinate ${j}` })),
      x: train.x,
      rows: trainingRows,
      labels: train.labels,
      classes: CLASSES,
    };
    const { bundle } = trainBundle(table, bundleOptions({ hidden: [8], epochs, seed: s, inDomainRate: target, labelColumn: 'y' }));
    const held = bundle.domain.held_out;
    expect(held.source).toBe('out_of_fold');
    expect(held.rows).toBe(trainingRows);
    const voting = DETECTORS.filter((n) => n === 'envelope' || bundle.domain[n] !== undefined).length;
    levels += held.level;
    uppers += Math.min(1, held.level + voting / (trainingRows + 1));
    seen.add(held.level);
    const fresh = gaussianClasses(10_000 * trainingRows + 5_000 + s, 1);
    const [answer] = createScorer(parseBundle(serializeBundle(bundle), 'coverage.bundle.json')).scoreRows(fresh.x, 1);
    if (answer?.domain.in_domain) passed++;
  }
  return { passed, seeds, meanLevel: levels / seeds, meanUpper: uppers / seeds, levels: seen };
}

function expectWithinBinomialBounds(r: Run): void {
  const low = binomialQuantile(0.001, r.seeds, r.meanLevel);
  const high = binomialQuantile(0.999, r.seeds, r.meanUpper);
  expect(r.passed).toBeGreaterThanOrEqual(low);
  expect(r.passed).toBeLessThanOrEqual(high);
}

describe('the domain flag passes the share of new in-domain rows it was calibrated to (conformal coverage)', () => {
  for (const [rows, seeds, epochs] of [
    [50, 200, 20],
    [200, 200, 20],
    [2000, 100, 4],
  ] as const) {
    it(`with ${rows} training rows, over ${seeds} freshly drawn training sets, at a target of 0.9`, () => {
      const r = run(rows, seeds, 0.9, epochs);
      expect([...r.levels]).toEqual([0.9]);
      expectWithinBinomialBounds(r);
    }, 120_000);
  }

  it('with 50 training rows at the default target of 0.99, which 50 rows cannot support: calibrates to the level they can, and holds it', () => {
    // 1/alpha - 1 = 99 rows are the fewest for 0.99; with 50, the highest level there is <= 50/51
    const r = run(50, 200, 0.99, 20);
    for (const level of r.levels) {
      expect(level).toBeLessThan(0.99);
      expect(level).toBeLessThanOrEqual(50 / 51);
    }
    expectWithinBinomialBounds(r);
  }, 120_000);
});
