// What `plumbline train` with its defaults gives on small open datasets, beside scikit-learn on
// the same stratified 70/30 splits (test/fixtures/small-data-reference.json, made by
// test/fixtures/make-small-data-reference.py): test accuracy, test log-loss, the fitted
// temperature, the share of test rows (in domain by construction) that the flag passes, and the
// mean margin of right and of wrong answers. Runs the CLI in child processes, as a user would.
//   npx tsx bench/small-data.ts [--json FILE]
import { execFileSync } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';

interface Split { seed: number; test: number[]; accuracy: number; log_loss: number }
interface Dataset { accuracy: number; log_loss: number; classes: string[]; splits: Split[] }
const root = fileURLToPath(new URL('..', import.meta.url));
const reference = JSON.parse(readFileSync(join(root, 'test/fixtures/small-data-reference.json'), 'utf8')) as { datasets: Record<string, Dataset & { data?: number[][]; labels?: string[] }> };

export interface SmallDataRow {
  dataset: string;
  seed: number;
  trainRows: number;
  testRows: number;
  accuracy: number;
  logLoss: number;
  temperature: number;
  passed: number;
  marginRight: number;
  marginWrong: number | null;
  sklearnAccuracy: number;
  sklearnLogLoss: number;
}

function datasetCsv(name: string): { header: string; lines: string[]; labels: string[] } {
  if (name === 'iris') {
    const d = reference.datasets.iris as Dataset & { data: number[][]; labels: string[] };
    return { header: 'sepal_length,sepal_width,petal_length,petal_width,label', lines: d.data.map((r, i) => `${r.join(',')},${d.labels[i]}`), labels: d.labels };
  }
  const [header, ...lines] = readFileSync(join(root, `test/fixtures/datasets/${name}.csv`), 'utf8').trim().split('\n');
  return { header: header as string, lines, labels: lines.map((l) => l.slice(l.lastIndexOf(',') + 1)) };
}

export function measureSmallData(cli: string[] = ['--import', 'tsx', join(root, 'src/cli/main.ts')]): SmallDataRow[] {
  const tmp = mkdtempSync(join(tmpdir(), 'plumbline-small-'));
  const rows: SmallDataRow[] = [];
  try {
    for (const [name, ref] of Object.entries(reference.datasets)) {
      const { header, lines, labels } = datasetCsv(name);
      for (const split of ref.splits) {
        const test = new Set(split.test);
        const trainFile = join(tmp, `${name}-${split.seed}-train.csv`);
        const testFile = join(tmp, `${name}-${split.seed}-test.csv`);
        writeFileSync(trainFile, `${header}\n${lines.filter((_, i) => !test.has(i)).join('\n')}\n`);
        writeFileSync(testFile, `${header}\n${split.test.map((i) => lines[i]).join('\n')}\n`);
        const bundle = join(tmp, `${name}-${split.seed}.bundle.json`);
        execFileSync(process.execPath, [...cli, 'train', '--data', trainFile, '--label', 'label', '--name', name, '--out', bundle], { stdio: ['ignore', 'ignore', 'ignore'] });
        const out = execFileSync(process.execPath, [...cli, 'score', '--bundle', bundle, '--data', testFile], { stdio: ['ignore', 'pipe', 'ignore'], maxBuffer: 1 << 28 }).toString();
        const answers = out.trim().split('\n').map((l) => JSON.parse(l) as { label: string; probabilities: Record<string, number>; margin: number; domain: { in_domain: boolean } });
        const truth = split.test.map((i) => labels[i] as string);
        let right = 0;
        let logLoss = 0;
        const margins = { right: [] as number[], wrong: [] as number[] };
        answers.forEach((a, i) => {
          const ok = a.label === truth[i];
          right += ok ? 1 : 0;
          (ok ? margins.right : margins.wrong).push(a.margin);
          // scikit-learn's log_loss clips probabilities to [eps, 1 - eps] with eps the float64 machine epsilon
          logLoss -= Math.log(Math.min(1 - 2.220446049250313e-16, Math.max(2.220446049250313e-16, a.probabilities[truth[i] as string] ?? 0)));
        });
        const b = JSON.parse(readFileSync(bundle, 'utf8')) as { calibration: { temperature: number } };
        const mean = (v: number[]): number => v.reduce((s, x) => s + x, 0) / v.length;
        rows.push({
          dataset: name,
          seed: split.seed,
          trainRows: lines.length - test.size,
          testRows: test.size,
          accuracy: right / answers.length,
          logLoss: logLoss / answers.length,
          temperature: b.calibration.temperature,
          passed: answers.filter((a) => a.domain.in_domain).length / answers.length,
          marginRight: mean(margins.right),
          marginWrong: margins.wrong.length > 0 ? mean(margins.wrong) : null,
          sklearnAccuracy: split.accuracy,
          sklearnLogLoss: split.log_loss,
        });
      }
    }
  } finally {
    rmSync(tmp, { recursive: true, force: true });
  }
  return rows;
}

export function smallDataTable(rows: SmallDataRow[]): string {
  const f = (v: number | null, d = 3): string => (v === null ? '-' : v.toFixed(d));
  return [
    '| dataset | seed | train rows | test accuracy (here / sklearn) | test log-loss (here / sklearn) | temperature | test rows passed (target 0.99) | mean margin right / wrong |',
    '|---|---:|---:|---|---|---:|---:|---|',
    ...rows.map((r) => `| ${r.dataset} | ${r.seed} | ${r.trainRows} | ${f(r.accuracy)} / ${f(r.sklearnAccuracy)} | ${f(r.logLoss)} / ${f(r.sklearnLogLoss)} | ${f(r.temperature, 2)} | ${f(r.passed)} | ${f(r.marginRight)} / ${f(r.marginWrong)} |`),
  ].join('\n');
}

if (process.argv[1] && fileURLToPath(import.meta.url) === process.argv[1]) {
  const rows = measureSmallData();
  process.stdout.write(`${smallDataTable(rows)}\n`);
  const at = process.argv.indexOf('--json');
  if (at > 0 && process.argv[at + 1]) writeFileSync(process.argv[at + 1] as string, `${JSON.stringify(rows, null, 2)}\n`);
}
