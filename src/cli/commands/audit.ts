import type { Command } from 'commander';
import { isServerUrl } from '../../store/location.js';
import { auditVerifyAction, auditVerifyServerAction, parseAnchor } from '../actions/audit.js';
import { processIo } from '../io.js';

export function registerAudit(program: Command): void {
  const audit = program.command('audit').description('the audit log');
  audit
    .command('verify')
    .description('recompute the hash chain of the audit log (read-only); exit 0 only when intact, 1 when not')
    .requiredOption('--db <file>', 'the audit log: a SQLite file or a postgres:// URL')
    .option('--head <seq:hash>', 'a head printed by an earlier verify, which the log must still hold')
    .option('--no-head-file', 'do not check the head kept beside the database (<db>.head), which is checked by default')
    .option('--json', 'print the verdict as JSON', false)
    .action(async (flags: { db: string; head?: string; headFile: boolean; json: boolean }) => {
      const head = flags.head !== undefined ? { head: parseAnchor(flags.head) } : {};
      if (isServerUrl(flags.db)) {
        const v = await auditVerifyServerAction({ db: flags.db, json: flags.json, ...head }, processIo());
        if (!v.intact) process.exitCode = 1;
        return;
      }
      const v = auditVerifyAction({ db: flags.db, json: flags.json, headFile: flags.headFile, ...(flags.head !== undefined ? { head: parseAnchor(flags.head) } : {}) }, processIo());
      if (!v.intact) process.exitCode = 1;
    });
}
