import type { LoggedRequest, RequestPage } from '../../contracts/logged-request.js';
import type { ChainedRow } from '../chain.js';
import type { ModelRecord } from '../models-table.js';
import { type RequestFilter, requestCursor, toItem } from '../request-query.js';
import type { Pool, PoolClient } from './pool.js';
import { carries, pairText } from './tag-match.js';

/** Records a bundle when loaded, as models-table.ts does on SQLite. */
export async function recordServerModel(pool: Pool, m: ModelRecord, now = Date.now()): Promise<void> {
  await pool.query(
    `INSERT INTO models (sha256, name, version, features, classes, first_loaded_at, last_loaded_at, bundle)
     VALUES ($1, $2, $3, $4, $5, $6, $6, $7)
     ON CONFLICT (sha256) DO UPDATE SET bundle = COALESCE(models.bundle, excluded.bundle), last_loaded_at = excluded.last_loaded_at`,
    [m.sha256, m.name, m.version, JSON.stringify(m.features.map((f) => ({ name: f.name, unit: f.unit }))), JSON.stringify(m.classes), now, m.bundle ?? null],
  );
}

/** A connection or the pool: whatever a query can run on. */
export type Queryable = Pool | PoolClient;

/**
 * Looks bundles up by hash, caching them (a sealed bundle never changes), on the connection given:
 * inside a transaction its own, so that one holding a lock never waits on the pool.
 */
export function serverModelCache(): (q: Queryable, sha256: string) => Promise<ModelRecord | null> {
  const cache = new Map<string, ModelRecord>();
  return async (q, sha256) => {
    const hit = cache.get(sha256);
    if (hit) return hit;
    const row = (await q.query<{ sha256: string; name: string; version: string; features: string; classes: string }>('SELECT sha256, name, version, features, classes FROM models WHERE sha256 = $1', [sha256])).rows[0];
    if (!row) return null;
    const record: ModelRecord = { ...row, features: JSON.parse(row.features) as ModelRecord['features'], classes: JSON.parse(row.classes) as string[] };
    cache.set(sha256, record);
    return record;
  };
}

/** GET /v1/requests on the server: the same pages, filters and cursors as request-query.ts. */
export function createServerRequestQuery(pool: Pool): {
  query(filter: RequestFilter, limit: number, cursor?: string): Promise<RequestPage>;
  lookup(requestId: string): Promise<LoggedRequest | null>;
} {
  const cached = serverModelCache();
  const model = (sha256: string) => cached(pool, sha256);
  return {
    async query(filter, limit, cursor) {
      // PostgreSQL text holds no NUL: a model or label with one names no row (and would be refused).
      if ([filter.model, filter.label].some((s) => s?.includes('\u0000'))) return { items: [], next_cursor: null };
      const pairs = filter.tags ?? [];
      const where: string[] = [];
      const args: unknown[] = [];
      const arg = (v: unknown): string => `$${args.push(v)}`;
      if (filter.model !== undefined) where.push(`model_name = ${arg(filter.model)}`);
      if (filter.from !== undefined) where.push(`received_at >= ${arg(filter.from)}`);
      if (filter.to !== undefined) where.push(`received_at < ${arg(filter.to)}`);
      if (filter.inDomain !== undefined) where.push(`in_domain = ${arg(filter.inDomain ? 1 : 0)}`);
      if (filter.label !== undefined) where.push(`label = ${arg(filter.label)}`);
      // Tags: narrowed by the pair's JSON text, decided on the parsed tags (tag-match.ts).
      for (const [k, v] of pairs) where.push(`strpos(tags, ${arg(pairText(k, v))}) > 0`);
      // The seq to read before: the cursor's, then the last row read when a page kept too few.
      const beforeAt = args.length;
      const before = arg(cursor === undefined ? null : requestCursor.decode(cursor));
      where.push(`(${before}::bigint IS NULL OR seq < ${before}::bigint)`);
      // Without tags every row read is kept; with them a page of rows may keep fewer, so read on.
      const size = pairs.length === 0 ? limit + 1 : Math.max(limit + 1, 200);
      const sql = `SELECT * FROM scored_requests WHERE ${where.join(' AND ')} ORDER BY seq DESC LIMIT ${arg(size)}`;
      const kept: ChainedRow[] = [];
      for (;;) {
        const rows = (await pool.query(sql, args)).rows as ChainedRow[];
        for (const r of rows) if (pairs.length === 0 || carries(r.tags, pairs)) kept.push(r);
        if (kept.length > limit || rows.length < size) break;
        args[beforeAt] = (rows[rows.length - 1] as ChainedRow).seq;
      }
      const more = kept.length > limit;
      const page = more ? kept.slice(0, limit) : kept;
      const items: LoggedRequest[] = [];
      for (const r of page) items.push(toItem(r, await model(r.model_sha256)));
      return { items, next_cursor: more ? requestCursor.encode((page[page.length - 1] as ChainedRow).seq) : null };
    },
    async lookup(requestId) {
      const r = (await pool.query('SELECT * FROM scored_requests WHERE request_id = $1', [requestId])).rows[0] as ChainedRow | undefined;
      return r ? toItem(r, await model(r.model_sha256)) : null;
    },
  };
}
