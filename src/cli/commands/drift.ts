import { isServerUrl } from '../../store/location.js';
import { existsSync } from 'node:fs';
import type { Command } from 'commander';
import { REPORT_DEFAULTS } from '../../reports/options.js';
import { driftAction } from '../actions/drift.js';
import { UsageError, processIo } from '../io.js';
import { integerIn, isoTime } from '../options.js';

const DAY = 86_400_000;

export function registerDrift(program: Command): void {
  program
    .command('drift')
    .description('build a drift report over the audit log, store it, and print its findings')
    .requiredOption('--db <file>', 'the audit log: a SQLite file or a postgres:// URL')
    .requiredOption('--model <name>', 'model name')
    .option('--from <iso>', 'start of the window, inclusive, UTC unless an offset is given (default: 24 hours before --to)', isoTime)
    .option('--to <iso>', 'end of the window, exclusive, UTC unless an offset is given (default: now)', isoTime)
    .option('--json <file>', 'also write the report as JSON')
    .option('--html <file>', 'also write the report as a self-contained HTML page')
    .option('--min-rows <n>', 'fewer scored rows give counts instead of p-values', integerIn(1, 1_000_000), REPORT_DEFAULTS.minRows)
    .option('--sample-cap <n>', 'rows kept for KS and Wasserstein; above it a seeded reservoir', integerIn(100, 1_000_000), REPORT_DEFAULTS.sampleCap)
    .action(async (flags: { db: string; model: string; from?: Date; to?: Date; json?: string; html?: string; minRows: number; sampleCap: number }) => {
      if (!isServerUrl(flags.db) && !existsSync(flags.db)) throw new UsageError(`--db ${flags.db}: no such file`);
      const to = flags.to ?? new Date();
      const from = flags.from ?? new Date(to.getTime() - DAY);
      await driftAction({ ...flags, from, to }, processIo());
    });
}
