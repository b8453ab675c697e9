import type { DriftStore, ScoredRowView, StoredReport } from '../drift-store.js';
import type { Pool } from './pool.js';

/** Rows fetched from the cursor at a time: a few MB of rows, and few round trips. */
const FETCH_ROWS = 5000;

/**
 * Reads a query's rows from a server-side cursor (DECLARE ... FETCH), a page at a time, inside a
 * read-only transaction on one connection of its own: memory stays bounded by one page whatever
 * the window.
 */
export async function* cursorPages<T>(pool: Pool, sql: string, values: unknown[], pageRows = FETCH_ROWS): AsyncGenerator<T[]> {
  const client = await pool.connect();
  let broken: Error | undefined;
  try {
    await client.query('BEGIN READ ONLY');
    await client.query(`DECLARE plumbline_rows NO SCROLL CURSOR FOR ${sql}`, values);
    for (;;) {
      const r = await client.query(`FETCH ${pageRows} FROM plumbline_rows`);
      if (r.rows.length > 0) yield r.rows as T[];
      if (r.rows.length < pageRows) break;
    }
    await client.query('COMMIT');
  } catch (err) {
    broken = err as Error;
    throw err;
  } finally {
    // A generator left early (the caller stopped reading) still ends its transaction.
    if (!broken) await client.query('ROLLBACK').catch(() => undefined);
    client.release(broken);
  }
}

export function createServerDriftStore(pool: Pool): DriftStore {
  const one = async <T>(sql: string, values: unknown[]): Promise<T | undefined> => (await pool.query(sql, values)).rows[0] as T | undefined;
  return {
    async bundleText(name, sha256) {
      const r = sha256
        ? await one<{ sha256: string; bundle: string }>('SELECT sha256, bundle FROM models WHERE sha256 = $1 AND bundle IS NOT NULL', [sha256])
        : await one<{ sha256: string; bundle: string }>('SELECT sha256, bundle FROM models WHERE name = $1 AND bundle IS NOT NULL ORDER BY last_loaded_at DESC, first_loaded_at DESC LIMIT 1', [name]);
      return r ? { sha256: r.sha256, text: r.bundle } : null;
    },
    scoredRows: (sha256, from, to) =>
      cursorPages<ScoredRowView>(
        pool,
        'SELECT received_at, features, label, margin, in_domain, review FROM scored_requests WHERE model_sha256 = $1 AND received_at >= $2 AND received_at < $3 ORDER BY received_at, seq',
        [sha256, from, to],
      ),
    countOtherVersions: async (name, sha256, from, to) =>
      (await one<{ n: number }>('SELECT COUNT(*) AS n FROM scored_requests WHERE model_name = $1 AND model_sha256 <> $2 AND received_at >= $3 AND received_at < $4', [name, sha256, from, to]))?.n ?? 0,
    countRejected: async (name, from, to) => (await one<{ n: number }>('SELECT COUNT(*) AS n FROM rejected_requests WHERE model_name = $1 AND received_at >= $2 AND received_at < $3', [name, from, to]))?.n ?? 0,
    async saveReport(r) {
      // A second nightly report of a model and day (another replica's) is not stored: the unique
      // index drift_reports_one_nightly keeps one.
      await pool.query(
        `INSERT INTO drift_reports (id, model_name, model_sha256, window_from, window_to, created_at, trigger, report)
         VALUES ($1, $2, $3, $4, $5, $6, $7, $8) ON CONFLICT (model_name, window_from, window_to) WHERE trigger = 'nightly' DO NOTHING`,
        [r.id, r.model_name, r.model_sha256, r.window_from, r.window_to, r.created_at, r.trigger, JSON.stringify(r.report)],
      );
    },
    getReport: async (id) => (await one<StoredReport>('SELECT id, model_name, model_sha256, window_from, window_to, created_at, trigger, report FROM drift_reports WHERE id = $1', [id])) ?? null,
    async listReports(filter, limit, afterSeq) {
      const where: string[] = [];
      const args: unknown[] = [];
      const arg = (v: unknown): string => `$${args.push(v)}`;
      if (afterSeq !== undefined) where.push(`seq < ${arg(afterSeq)}`);
      if (filter.model !== undefined) where.push(`model_name = ${arg(filter.model)}`);
      if (filter.from !== undefined) where.push(`window_from >= ${arg(filter.from)}`);
      if (filter.to !== undefined) where.push(`window_from < ${arg(filter.to)}`);
      const sql = `SELECT seq, id, model_name, model_sha256, window_from, window_to, created_at, trigger, report FROM drift_reports ${where.length ? `WHERE ${where.join(' AND ')}` : ''} ORDER BY seq DESC LIMIT ${arg(limit)}`;
      return (await pool.query(sql, args)).rows as Array<StoredReport & { seq: number }>;
    },
    hasReport: async (name, from, to) => (await one('SELECT 1 FROM drift_reports WHERE model_name = $1 AND window_from = $2 AND window_to = $3 LIMIT 1', [name, from, to])) !== undefined,
  };
}
