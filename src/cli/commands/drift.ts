import { existsSync } from 'node:fs';
import { type Command, InvalidArgumentError } from 'commander';
import { REPORT_DEFAULTS } from '../../reports/build-report.js';
import { driftAction } from '../actions/drift.js';
import { UsageError, processIo } from '../io.js';
import { integerIn } from '../options.js';

function isoTime(v: string): Date {
  const t = Date.parse(v);
  if (!/^\d{4}-\d{2}-\d{2}(T\d{2}:\d{2}(:\d{2}(\.\d+)?)?(Z|[+-]\d{2}:\d{2})?)?$/.test(v) || Number.isNaN(t)) {
    throw new InvalidArgumentError('expected an ISO 8601 date or date-time, e.g. 2026-11-30 or 2026-11-30T06:00:00Z');
  }
  return new Date(t);
}

const DAY = 86_400_000;

export function registerDrift(program: Command): void {
  program
    .command('drift')
    .description('build a drift report over the audit log, store it, and print its findings')
    .requiredOption('--db <file>', 'the audit log database')
    .requiredOption('--model <name>', 'model name')
    .option('--from <iso>', 'start of the window, inclusive (default: 24 hours before --to)', isoTime)
    .option('--to <iso>', 'end of the window, exclusive (default: now)', isoTime)
    .option('--json <file>', 'also write the report as JSON')
    .option('--html <file>', 'also write the report as a self-contained HTML page')
    .option('--min-rows <n>', 'fewer scored rows give counts instead of p-values', integerIn(1, 1_000_000), REPORT_DEFAULTS.minRows)
    .option('--sample-cap <n>', 'rows kept for KS and Wasserstein; above it a seeded reservoir', integerIn(100, 1_000_000), REPORT_DEFAULTS.sampleCap)
    .action(async (flags: { db: string; model: string; from?: Date; to?: Date; json?: string; html?: string; minRows: number; sampleCap: number }) => {
      if (!existsSync(flags.db)) throw new UsageError(`--db ${flags.db}: no such file`);
      const to = flags.to ?? new Date();
      const from = flags.from ?? new Date(to.getTime() - DAY);
      await driftAction({ ...flags, from, to }, processIo());
    });
}
