import type { Command } from 'commander';
import { scoreAction } from '../actions/score.js';
import { processIo } from '../io.js';
import { integerIn } from '../options.js';

export function registerScore(program: Command): void {
  program
    .command('score')
    .description('score the rows of a CSV offline, one JSON line per row')
    .requiredOption('--bundle <file>', 'bundle to score with')
    .requiredOption('--data <file.csv>', 'rows to score; columns are picked by feature name, others ignored')
    .option('--out <file.jsonl>', 'write JSON lines here instead of standard output')
    .option('--batch-size <n>', 'rows scored together', integerIn(1, 65536), 1024)
    .action(async (flags: { bundle: string; data: string; out?: string; batchSize: number }) => {
      const summary = await scoreAction(flags, processIo());
      if (summary.rejected > 0) process.exitCode = 1;
    });
}
