import type { Command } from 'commander';
import { createKeyAction, listKeysAction, revokeKeyAction } from '../actions/keys.js';
import { processIo } from '../io.js';
import { oneOf } from '../options.js';

export function registerKeys(program: Command): void {
  const keys = program.command('keys').description('API keys: who may score (scorer), read (reader) or do everything (admin)');
  keys
    .command('create')
    .description('make a key and print it once, as the last line of stdout; only its hash is stored')
    .requiredOption('--db <file>', 'the audit log: a SQLite file (created when missing) or a postgres:// URL')
    .requiredOption('--role <role>', 'scorer, reader or admin', oneOf(['scorer', 'reader', 'admin'] as const))
    .requiredOption('--label <text>', 'who or what holds the key; stored with every request it scores')
    .action((flags: { db: string; role: 'scorer' | 'reader' | 'admin'; label: string }) => createKeyAction(flags, processIo()).then(() => undefined));
  keys
    .command('list')
    .description('every key: id, role, label, when made, last used and revoked; never the key itself')
    .requiredOption('--db <file>', 'the audit log: a SQLite file or a postgres:// URL')
    .option('--json', 'as JSON', false)
    .action((flags: { db: string; json: boolean }) => listKeysAction(flags, processIo()).then(() => undefined));
  keys
    .command('revoke')
    .description('stop a key working, at once')
    .argument('<id>', 'the key id, as keys list shows it')
    .requiredOption('--db <file>', 'the audit log: a SQLite file or a postgres:// URL')
    .action((id: string, flags: { db: string }) => revokeKeyAction({ db: flags.db, id }, processIo()));
}
