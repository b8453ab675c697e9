import BetterSqlite3, { type Database } from 'better-sqlite3';
import { type AnchorCheck, type ChainAnchor, type ChainVerdict, checkAnchor, checkOutcomeAnchor, verifyChain } from './audit-verify.js';
import { type DriftStore, createDriftStore } from './drift-store.js';
import { type OutcomeChainVerdict, verifyOutcomeChain } from './outcomes-store.js';

/**
 * A read-only connection to an audit log another process or thread may be writing (WAL lets it
 * read meanwhile): what `audit verify` and the report worker need, without the writer's
 * migrations, sealing or checkpoints.
 */
export interface AuditReader {
  readonly drift: DriftStore;
  /** Whether the log has been migrated to the hash chain (a log from before it has not). */
  hasChain(): boolean;
  verifyChain(anchor?: ChainAnchor): ChainVerdict;
  /** Whether the log still holds a head recorded earlier (the head file, or one given). */
  checkAnchor(anchor: ChainAnchor): AnchorCheck;
  /** Recomputes the outcome chain; null for a log from before outcomes (migration 009). */
  verifyOutcomes(): OutcomeChainVerdict | null;
  /** Whether the outcome chain still holds the outcome head the head file recorded. */
  checkOutcomeAnchor(anchor: { seq: number; hash: string }): ReturnType<typeof checkOutcomeAnchor>;
  close(): void;
}

/** Opens an existing database file read-only; throws if there is none. */
export function openAuditReader(file: string): AuditReader {
  const db: Database = new BetterSqlite3(file, { readonly: true, fileMustExist: true });
  return {
    drift: createDriftStore(db),
    hasChain: () => db.prepare("SELECT 1 FROM pragma_table_info('scored_requests') WHERE name = 'chain_hash'").get() !== undefined,
    verifyChain: (anchor) => verifyChain(db, anchor),
    checkAnchor: (anchor) => checkAnchor(db, anchor),
    checkOutcomeAnchor: (anchor) => checkOutcomeAnchor(db, anchor),
    verifyOutcomes: () => (db.prepare("SELECT 1 FROM sqlite_schema WHERE type = 'table' AND name = 'outcomes'").get() === undefined ? null : verifyOutcomeChain(db)),
    close: () => db.close(),
  };
}
