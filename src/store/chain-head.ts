import type { Database } from 'better-sqlite3';
import { GENESIS } from './chain.js';

export interface ChainHead {
  seq: number;
  hash: Buffer;
}

/**
 * Reads where the next row joins the chain: after the newest row, else after the newest retention
 * cut (every row was pruned), else at the genesis. Read inside the writing transaction, it
 * is right whatever else wrote or pruned since.
 */
export function createChainHeadReader(db: Database): () => ChainHead {
  const lastRow = db.prepare('SELECT seq, chain_hash FROM scored_requests ORDER BY seq DESC LIMIT 1');
  const lastCheckpoint = db.prepare('SELECT seq, chain_hash FROM retention_cuts ORDER BY seq DESC LIMIT 1');
  return () => {
    const last = lastRow.get() as { seq: number; chain_hash: Buffer | null } | undefined;
    if (last?.chain_hash) return { seq: last.seq, hash: last.chain_hash };
    if (last) throw new Error(`row ${last.seq}, the newest of the audit log, has no chain hash, so no row can be chained after it`);
    const cp = lastCheckpoint.get() as { seq: number; chain_hash: Buffer } | undefined;
    return cp ? { seq: cp.seq, hash: cp.chain_hash } : { seq: 0, hash: GENESIS };
  };
}

/** The newest outcome's seq and chain hash, or null when none is recorded (or the table is not there yet). */
export function createOutcomeHeadReader(db: Database): () => { seq: number; hash: string } | null {
  const table = db.prepare("SELECT 1 FROM sqlite_schema WHERE type = 'table' AND name = 'outcomes'").get();
  if (table === undefined) return () => null;
  const last = db.prepare('SELECT seq, chain_hash FROM outcomes ORDER BY seq DESC LIMIT 1');
  return () => {
    const r = last.get() as { seq: number; chain_hash: Buffer } | undefined;
    return r ? { seq: r.seq, hash: r.chain_hash.toString('hex') } : null;
  };
}
