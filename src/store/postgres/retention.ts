import type { Retention } from '../retention.js';
import type { Pool } from './pool.js';

/**
 * Retention on the server, as retention.ts does it on SQLite: scored rows go only as a prefix in
 * seq order, with a retention cut recording the chain hash of the last row removed. The chain head
 * is its own row (chain_head), so pruning every row leaves the next commit chaining on.
 * Replicas pruning at once: the cut's primary key lets one of two equal steps commit.
 */
export function createServerRetention(pool: Pool): Retention {
  return {
    async pruneStep(cutoff, maxRows, now = Date.now()) {
      const client = await pool.connect();
      let broken: Error | undefined;
      try {
        await client.query('BEGIN');
        const keep = (await client.query<{ seq: number | null }>('SELECT MIN(seq) AS seq FROM scored_requests WHERE received_at >= $1', [cutoff])).rows[0]?.seq ?? Number.MAX_SAFE_INTEGER;
        const last = (
          await client.query<{ seq: number; chain_hash: Buffer }>(
            'SELECT seq, chain_hash FROM (SELECT seq, chain_hash FROM scored_requests WHERE seq < $1 ORDER BY seq LIMIT $2) s ORDER BY seq DESC LIMIT 1',
            [keep, maxRows],
          )
        ).rows[0];
        let scored = 0;
        if (last) {
          scored = (await client.query('DELETE FROM scored_requests WHERE seq <= $1', [last.seq])).rowCount ?? 0;
          await client.query('INSERT INTO retention_cuts (seq, chain_hash, created_at, rows_removed) VALUES ($1, $2, $3, $4)', [last.seq, last.chain_hash, now, scored]);
        }
        const rejected = (await client.query('DELETE FROM rejected_requests WHERE seq IN (SELECT seq FROM rejected_requests WHERE received_at < $1 ORDER BY seq LIMIT $2)', [cutoff, maxRows])).rowCount ?? 0;
        const outbox = (await client.query("DELETE FROM outbox WHERE seq IN (SELECT seq FROM outbox WHERE status <> 'pending' AND created_at < $1 LIMIT $2)", [cutoff, maxRows])).rowCount ?? 0;
        await client.query('COMMIT');
        return { scored, rejected, outbox };
      } catch (err) {
        await client.query('ROLLBACK').catch(() => undefined);
        broken = err as Error;
        throw err;
      } finally {
        client.release(broken);
      }
    },
  };
}
