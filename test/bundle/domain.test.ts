import binomialCdf from '@stdlib/stats-base-dists-binomial-cdf';
import { describe, expect, it } from 'vitest';
import { createScorer } from '../../src/bundle/scorer.js';
import { parseBundle } from '../../src/bundle/verify.js';
import { serializeBundle } from '../../src/bundle/write.js';
import { createRng, deriveSeed } from '../../src/core/rng.js';
import { stratifiedSplit, take, takeRows } from '../../src/core/split.js';
import { indexLabels, readLabelledCsv } from '../../src/io/feature-table.js';
import { bundleOptions, irisBundle, irisTable } from '../helpers/bundles.js';
import { trainBundle } from '../../src/bundle/train-bundle.js';

const load = (b: ReturnType<typeof irisBundle>['bundle']) => createScorer(parseBundle(serializeBundle(b), 'b.json'));

describe('the far field of a ReLU network', () => {
  // Hein et al. 2019 (CVPR): along almost any ray, a ReLU network's logits grow linearly and its
  // softmax tends to a one-hot vector, however far from the data the point lies.
  const { bundle } = irisBundle({ epochs: 150 });
  const scorer = load(bundle);
  const mean = bundle.preprocess.mean;
  const along = (x0: number[], t: number) => Float64Array.from(x0, (v, j) => (mean[j] as number) + t * (v - (mean[j] as number)));

  it('grows more confident as the point moves out along a ray, while the flag says out of domain', () => {
    for (const x0 of [
      [6.3, 2.5, 4.9, 1.5],
      [5.0, 3.6, 1.4, 0.2],
      [7.7, 2.8, 6.7, 2.0],
    ]) {
      const answers = [10, 100, 1000].map((t) => scorer.scoreRows(along(x0, t), 1)[0]!);
      const top = answers.map((a) => Math.max(...Object.values(a.probabilities)));
      expect(top[2]).toBeGreaterThan(0.999);
      expect(top[2]).toBeGreaterThanOrEqual(top[0]! - 1e-12);
      for (const a of answers) {
        expect(a.domain.in_domain).toBe(false);
        expect(a.review).toBe(true);
        expect(a.domain.checks.find((c) => c.detector === 'input_mahalanobis')?.passed).toBe(false);
      }
    }
  });

  it('is where the maximum softmax probability fails as a detector and the distance-based ones do not (bundle evaluation)', () => {
    const far = bundle.domain.evaluation.probes.find((p) => p.name === 'scaled_100x')!;
    expect(far.detection_rate.composite).toBe(1);
    expect(far.detection_rate.input_mahalanobis).toBe(1);
    expect(far.auroc.input_mahalanobis).toBe(1);
    expect(far.auroc.max_probability).toBeLessThan(0.5);
  });
});

describe('calibration of the flag', () => {
  it('stores an out-of-fold, leave-one-out pass rate, no higher than the rows that set the thresholds would claim, with its interval', () => {
    const { bundle } = irisBundle();
    const h = bundle.domain.held_out;
    expect(h).toMatchObject({ source: 'out_of_fold', rows: 150 });
    expect(h.in_domain_rate + h.false_alarm_rate).toBeCloseTo(1, 12);
    // every row of the table, each scored as the calibration saw it: by the member that never
    // saw it, against the envelope of that member's rows
    const t = irisTable();
    expect(h.false_alarm_rate).toBeGreaterThan(0);
    expect(h.false_alarm_ci.low).toBeLessThanOrEqual(h.false_alarm_rate);
    expect(h.false_alarm_ci.high).toBeGreaterThanOrEqual(h.false_alarm_rate);
    expect(bundle.domain.evaluation.pass_rate.composite).toBe(h.in_domain_rate);
    // in sample, the served flag lets through at least what leave-one-out claims
    const answers = load(bundle).scoreRows(t.x, t.rows);
    expect(answers.filter((a) => a.domain.in_domain).length / answers.length).toBeGreaterThanOrEqual(h.in_domain_rate);
  });

  it('with --folds 1 calibrates on the hold-out, as a single network does', () => {
    const { bundle } = irisBundle({ folds: 1 });
    expect(bundle.members).toHaveLength(1);
    expect(bundle.domain.held_out).toMatchObject({ source: 'validation', rows: 30 });
    expect(bundle.domain.disagreement).toBeUndefined();
    expect(bundle.domain.left_out.map((l) => l.detector)).toContain('disagreement');
    const t = irisTable();
    const split = stratifiedSplit(t.labels, 3, 0.2, createRng(deriveSeed(1, 1)));
    const answers = load(bundle).scoreRows(takeRows(t.x, 4, split.validation), split.validation.length);
    expect(answers.filter((a) => a.domain.in_domain).length / answers.length).toBeGreaterThanOrEqual(bundle.domain.held_out.in_domain_rate);
  });

  it('runs only the envelope when the other detectors are switched off', () => {
    const { bundle } = irisBundle({ detectors: [] });
    const [answer] = load(bundle).scoreRows(Float64Array.of(5.1, 3.5, 1.4, 0.2), 1);
    expect(answer!.domain.checks.map((c) => c.detector)).toEqual(['envelope']);
    expect(bundle.domain.input_mahalanobis).toBeUndefined();
  });

  it('calibrates on separate in-domain rows when given them (--calibrate-on)', () => {
    const t = irisTable();
    const usual = trainBundle(t, bundleOptions()).bundle.domain;
    // rows spread three times wider than the data: the thresholds must follow them
    const mean = [5.84, 3.05, 3.76, 1.2];
    const wide = Float64Array.from(t.x.slice(0, 60 * 4), (v, i) => mean[i % 4]! + 3 * (v - mean[i % 4]!));
    const cal = trainBundle(t, bundleOptions({ calibrateOn: { x: wide, rows: 60 } })).bundle.domain;
    expect(cal.held_out).toMatchObject({ source: 'calibrate-on', rows: 60 });
    expect(cal.input_mahalanobis!.threshold).toBeGreaterThan(2 * usual.input_mahalanobis!.threshold);
    expect(cal.envelope.tolerance).toBeGreaterThan(usual.envelope.tolerance);
  });

  // Open datasets that ship with scikit-learn (UCI copies), exported by
  // test/fixtures/make-domain-fixtures.py; nothing here was tuned on them. A stratified 30% is
  // kept aside; the bundle is trained and calibrated on the rest; the kept rows are then scored.
  // The realised pass rate varies with the calibration rows as much as with the test rows, so the
  // bound is 3 standard deviations of both: sqrt(f (1 - f) (1/n_cal + 1/n_test) / seeds).
  // Digits (1,797 rows, 64 features) trains with 3 folds and fewer epochs, to keep the suite short.
  const cases: Array<[string, number, number, Partial<Parameters<typeof bundleOptions>[0]>]> = [
    ['breast-cancer', 0.95, 4, {}],
    ['digits', 0.95, 3, { folds: 3, epochs: 60 }],
    ['wine', 0.9, 6, {}],
  ];
  for (const [name, target, seeds, options] of cases) {
    it(`lets through about ${target} of unseen in-domain rows of ${name} (averaged over ${seeds} splits)`, async () => {
      const data = await readLabelledCsv(new URL(`../fixtures/datasets/${name}.csv`, import.meta.url).pathname, { label: 'label' });
      const { classes, indices } = indexLabels(data.labels);
      const d = data.featureNames.length;
      let flagged = 0;
      let scored = 0;
      let calRows = 0; // summed over splits
      for (let seed = 0; seed < seeds; seed++) {
        const s = stratifiedSplit(indices, classes.length, 0.3, createRng(seed));
        const x = takeRows(data.x, d, s.train);
        const y = take(indices, s.train);
        const { bundle } = trainBundle(
          { features: data.featureNames.map((n) => ({ name: n, unit: '', description: '' })), x, rows: y.length, labels: y, classes },
          bundleOptions({ name: name.replace(/[^a-z0-9]/g, '-'), inDomainRate: target, seed: seed + 1, epochs: 200, ...options }),
        );
        calRows += bundle.domain.held_out.rows;
        const answers = load(bundle).scoreRows(takeRows(data.x, d, s.validation), s.validation.length);
        flagged += answers.filter((a) => !a.domain.in_domain).length;
        scored += answers.length;
      }
      const f = 1 - target;
      const sd = Math.sqrt((f * (1 - f) * (1 / (calRows / seeds) + 1 / (scored / seeds))) / seeds);
      // two-sided: a flag that never fires fails this as surely as one that fires too often
      expect(Math.abs(flagged / scored - f)).toBeLessThan(3 * sd);
      expect(flagged).toBeGreaterThan(0);
    });
  }
});

describe('the demo model on its invented traffic', () => {
  it('passes normal traffic at the target rate: the flagged count is within a binomial test at p = 0.001', async () => {
    const { readBundle } = await import('../../src/bundle/verify.js');
    const { openCsv } = await import('../../src/io/csv.js');
    const { parseFeatures, planColumns } = await import('../../src/io/feature-table.js');
    const bundle = await readBundle(new URL('../../demo-data/models/moulding-quality.bundle.json', import.meta.url).pathname);
    const scorer = createScorer(bundle);
    const csv = await openCsv(new URL('../../demo-data/traffic-normal.csv', import.meta.url).pathname);
    const plan = planColumns(csv.header, 'traffic-normal.csv', { features: [...scorer.featureNames] });
    const rows: number[][] = [];
    for await (const r of csv.rows) {
      const x = new Float64Array(plan.featureNames.length);
      parseFeatures(r.fields, r.line, plan, 'traffic-normal.csv', x, 0);
      rows.push(Array.from(x));
    }
    const answers = scorer.scoreRows(Float64Array.from(rows.flat()), rows.length);
    const flagged = answers.filter((a) => !a.domain.in_domain).length;
    const f = 1 - bundle.file.domain.target_in_domain_rate;
    // P(X >= flagged) for X ~ Binomial(n, f), by @stdlib/stats-base-dists-binomial-cdf
    const upperTail = flagged === 0 ? 1 : 1 - binomialCdf(flagged - 1, answers.length, f);
    const lowerTail = binomialCdf(flagged, answers.length, f);
    expect(upperTail).toBeGreaterThan(0.001);
    expect(lowerTail).toBeGreaterThan(0.001);
  });
});
