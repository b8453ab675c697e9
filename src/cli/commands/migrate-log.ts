import type { Command } from 'commander';
import { migrateLogAction } from '../actions/migrate-log.js';
import { processIo } from '../io.js';

export function registerMigrateLog(program: Command): void {
  program
    .command('migrate-log')
    .description('copy a SQLite audit log into an empty PostgreSQL database, keeping its hash chain verifiable')
    .requiredOption('--from <file>', 'the SQLite audit log (stop its server first)')
    .requiredOption('--to <url>', 'a postgres:// or postgresql:// URL of an empty database')
    .action(async (flags: { from: string; to: string }) => {
      await migrateLogAction(flags, processIo());
    });
}
