import type { Command } from 'commander';
import { exportAction } from '../actions/export.js';
import { processIo } from '../io.js';
import { isoTime, oneOf } from '../options.js';

const DAY = 86_400_000;

export function registerExport(program: Command): void {
  program
    .command('export')
    .description('write the logged vectors of a model, with their outcomes, as a CSV that plumbline train reads')
    .requiredOption('--db <file>', 'the audit log database')
    .requiredOption('--model <name>', 'model name')
    .option('--from <iso>', 'answers received at or after, UTC unless an offset is given (default: 30 days before --to)', isoTime)
    .option('--to <iso>', 'answers received before, UTC unless an offset is given (default: now)', isoTime)
    .option('--outcomes <which>', 'only: answers with an outcome (to train on); any: every answer, label empty where none is known', oneOf(['only', 'any'] as const), 'only')
    .requiredOption('--out <file.csv>', 'where to write the CSV')
    .action(async (flags: { db: string; model: string; from?: Date; to?: Date; outcomes: 'only' | 'any'; out: string }) => {
      const to = flags.to ?? new Date();
      const from = flags.from ?? new Date(to.getTime() - 30 * DAY);
      await exportAction({ ...flags, from, to }, processIo());
    });
}
