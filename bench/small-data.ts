// The small-data table of the README: `plumbline train` with its defaults on stratified 70/30
// splits of Iris, Wine and Breast Cancer, beside scikit-learn on the same splits
// (test/helpers/small-data.ts; test/cli/small-data.test.ts checks the figures and the README).
//   npx tsx bench/small-data.ts [--splits]
import { fileURLToPath } from 'node:url';
import { figures, runSmallData, smallDataTable } from '../test/helpers/small-data.js';

if (process.argv[1] && fileURLToPath(import.meta.url) === process.argv[1]) {
  const results = Object.fromEntries(await Promise.all(['iris', 'wine', 'breast-cancer'].map(async (n) => [n, await runSmallData(n)] as const)));
  process.stdout.write(`${smallDataTable(results)}\n`);
  if (process.argv.includes('--splits')) {
    process.stdout.write('\n| dataset | seed | accuracy | log-loss | temperature | test rows passed | margin right / wrong |\n|---|---:|---:|---:|---:|---:|---|\n');
    for (const [name, rs] of Object.entries(results)) {
      for (const r of rs) {
        const f = figures(r);
        process.stdout.write(`| ${name} | ${r.seed} | ${f.accuracy.toFixed(3)} | ${f.logLoss.toFixed(3)} | ${f.temperature.toFixed(2)} | ${f.passed.toFixed(3)} | ${f.marginRight.toFixed(3)} / ${f.marginWrong?.toFixed(3) ?? '-'} |\n`);
      }
    }
  }
}
