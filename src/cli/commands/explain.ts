import type { Command } from 'commander';
import { explainAction } from '../actions/explain.js';
import { processIo } from '../io.js';
import { integerIn } from '../options.js';

export function registerExplain(program: Command): void {
  program
    .command('explain')
    .description('score the rows of a CSV offline with each answer explained, one JSON line per row')
    .requiredOption('--bundle <file>', 'bundle to score and explain with')
    .requiredOption('--data <file.csv>', 'rows to explain; columns are picked by feature name, others ignored')
    .option('--out <file.jsonl>', 'write JSON lines here instead of standard output')
    .option('--batch-size <n>', 'rows scored together', integerIn(1, 65536), 256)
    .action(async (flags: { bundle: string; data: string; out?: string; batchSize: number }) => {
      const summary = await explainAction(flags, processIo());
      if (summary.rejected > 0) process.exitCode = 1;
    });
}
