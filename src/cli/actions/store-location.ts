import { existsSync } from 'node:fs';
import { UsageError } from '../io.js';

/**
 * The --db of the commands that read the audit log: a SQLite file that must exist. A
 * postgres:// URL is the other store (issue 16), which this version cannot open yet.
 */
export function auditLogFile(db: string): string {
  if (/^postgres(ql)?:\/\//i.test(db)) throw new UsageError(`--db ${db.replace(/\/\/[^@/]*@/, '//***@')}: this version of plumbline reads the audit log from a SQLite file only`);
  if (!existsSync(db)) throw new UsageError(`--db ${db}: no such file`);
  return db;
}
