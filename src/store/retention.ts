import type { Awaitable, Sync } from './awaitable.js';
import type { Database } from 'better-sqlite3';

export interface PruneStep {
  /** Scored rows removed in this step (0: nothing left to remove). */
  scored: number;
  rejected: number;
  outbox: number;
}

export interface Retention {
  /**
   * Removes at most `maxRows` of the oldest rows received before `cutoff` (Unix ms), in one short
   * transaction. Scored rows go only as a prefix in seq order, so that the rows kept still chain
   * from a retention cut: a cut records the chain hash of the last row removed.
   */
  pruneStep(cutoff: number, maxRows: number, now?: number): Awaitable<PruneStep>;
}

export function createRetention(db: Database): Sync<Retention> {
  // The first row to keep: the oldest that is not old enough. Everything before it may go.
  const firstKept = db.prepare('SELECT MIN(seq) AS seq FROM scored_requests WHERE received_at >= ?');
  const lastRemoved = db.prepare(
    'SELECT seq, chain_hash FROM (SELECT seq, chain_hash FROM scored_requests WHERE seq < ? ORDER BY seq LIMIT ?) ORDER BY seq DESC LIMIT 1',
  );
  const removeScored = db.prepare('DELETE FROM scored_requests WHERE seq <= ?');
  const cut = db.prepare('INSERT INTO retention_cuts (seq, chain_hash, created_at, rows_removed) VALUES (?, ?, ?, ?)');
  const removeRejected = db.prepare('DELETE FROM rejected_requests WHERE seq IN (SELECT seq FROM rejected_requests WHERE received_at < ? ORDER BY seq LIMIT ?)');
  // Only deliveries that are finished; pending ones are kept whatever their age.
  const removeOutbox = db.prepare("DELETE FROM outbox WHERE seq IN (SELECT seq FROM outbox WHERE status <> 'pending' AND created_at < ? LIMIT ?)");

  const step = db.transaction((cutoff: number, maxRows: number, now: number): PruneStep => {
    const keep = (firstKept.get(cutoff) as { seq: number | null }).seq ?? Number.MAX_SAFE_INTEGER;
    const last = lastRemoved.get(keep, maxRows) as { seq: number; chain_hash: Buffer | null } | undefined;
    let scored = 0;
    if (last) {
      if (!last.chain_hash) throw new Error(`row ${last.seq} is not sealed into the hash chain; nothing was pruned`);
      scored = removeScored.run(last.seq).changes;
      cut.run(last.seq, last.chain_hash, now, scored);
    }
    const rejected = removeRejected.run(cutoff, maxRows).changes;
    const outbox = removeOutbox.run(cutoff, maxRows).changes;
    return { scored, rejected, outbox };
  });
  return { pruneStep: (cutoff, maxRows, now = Date.now()) => step(cutoff, maxRows, now) };
}
