import type { Database } from 'better-sqlite3';
import { type ChainedRow, GENESIS, chainHash } from './chain.js';

/**
 * Seals the rows logged before the hash chain existed into it, in seq order, in one transaction,
 * once: migration 005 leaves a marker that this removes. Later, a row without a chain hash is
 * never sealed here, since sealing it would hide whatever was done to it; `audit verify` names it.
 */
export function sealPreChainRows(db: Database): number {
  const pending = db.prepare('SELECT 1 FROM chain_seal_pending').get() !== undefined;
  if (!pending) return 0;
  const chunk = db.prepare('SELECT * FROM scored_requests WHERE seq >= ? ORDER BY seq LIMIT 1000');
  const update = db.prepare('UPDATE scored_requests SET chain_hash = ? WHERE seq = ?');
  let n = 0;
  db.transaction(() => {
    let prev: Buffer = GENESIS;
    // Read in chunks, not iterated: a connection cannot write while it iterates.
    for (let from = 0; ; ) {
      const rows = chunk.all(from) as ChainedRow[];
      for (const row of rows) {
        prev = chainHash(prev, row);
        update.run(prev, row.seq);
        n++;
      }
      if (rows.length < 1000) break;
      from = (rows[rows.length - 1] as ChainedRow).seq + 1;
    }
    db.prepare('DELETE FROM chain_seal_pending').run();
  })();
  return n;
}
