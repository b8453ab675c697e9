import { existsSync } from 'node:fs';
import { isServerUrl } from '../../store/location.js';
import { UsageError } from '../io.js';

/**
 * The --db of the commands that read the audit log: a postgres:// or postgresql:// URL (the
 * store several replicas share), or a SQLite file that must exist.
 */
export function auditLogAt(db: string): string {
  if (isServerUrl(db)) return db;
  if (!existsSync(db)) throw new UsageError(`--db ${db}: no such file`);
  return db;
}
