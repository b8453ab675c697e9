import type { Command } from 'commander';
import { compareAction } from '../actions/compare.js';
import { processIo } from '../io.js';
import { isoTime } from '../options.js';

const DAY = 86_400_000;

export function registerCompare(program: Command): void {
  program
    .command('compare')
    .description('rescore the logged vectors of a model with a candidate bundle, offline, and compare the two on the outcomes')
    .requiredOption('--db <file>', 'the audit log database')
    .requiredOption('--model <name>', 'model name')
    .requiredOption('--candidate <file.bundle.json>', 'the bundle to try')
    .option('--from <iso>', 'answers received at or after, UTC unless an offset is given (default: 30 days before --to)', isoTime)
    .option('--to <iso>', 'answers received before, UTC unless an offset is given (default: now)', isoTime)
    .option('--json <file>', 'also write the comparison as JSON')
    .option('--html <file>', 'also write the comparison as a self-contained HTML page')
    .action(async (flags: { db: string; model: string; candidate: string; from?: Date; to?: Date; json?: string; html?: string }) => {
      const to = flags.to ?? new Date();
      const from = flags.from ?? new Date(to.getTime() - 30 * DAY);
      await compareAction({ ...flags, from, to }, processIo());
    });
}
