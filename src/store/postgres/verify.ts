import { type ChainAnchor, type ChainVerdict, type StoredRow, startChainWalk } from '../audit-verify.js';
import { cursorPages } from './drift.js';
import type { Pool } from './pool.js';

/**
 * audit verify on the server: the same walk and the same verdicts as on SQLite (audit-verify.ts),
 * over the rows read in seq order from a server-side cursor. The one chain of every replica is
 * checked from the genesis, or from the newest retention cut, to the newest row.
 */
export async function verifyServerChain(pool: Pool, anchor?: ChainAnchor): Promise<ChainVerdict> {
  const cp = (await pool.query<{ seq: number; chain_hash: Buffer }>('SELECT seq, chain_hash FROM retention_cuts ORDER BY seq DESC LIMIT 1')).rows[0];
  let page: StoredRow[] = [];
  let index = 0;
  let lookahead: StoredRow | undefined;
  // The row after the one being checked, to tell a row put in from one changed: the next in the
  // page, or at a page's end one looked up on its own.
  const rowAt = (seq: number): StoredRow | undefined => {
    const next = index + 1 < page.length ? page[index + 1] : lookahead;
    return next?.seq === seq ? next : undefined;
  };
  const walk = startChainWalk(cp, rowAt, anchor);
  for await (const rows of cursorPages<StoredRow>(pool, 'SELECT * FROM scored_requests ORDER BY seq', [])) {
    page = rows;
    for (index = 0; index < rows.length; index++) {
      const row = rows[index] as StoredRow;
      if (index === rows.length - 1) lookahead = (await pool.query('SELECT * FROM scored_requests WHERE seq = $1', [row.seq + 1])).rows[0] as StoredRow | undefined;
      const stop = walk.push(row);
      if (stop) return stop;
    }
  }
  return walk.finish();
}
