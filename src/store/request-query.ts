import type { Database } from 'better-sqlite3';
import type { DomainCheck, OutsideFeature } from '../contracts/score.js';
import type { LoggedRequest, RequestPage } from '../contracts/logged-request.js';
import { cursorCodec } from '../cursor.js';
import { fromFloat64Blob } from './float64-blob.js';
import { type ModelRecord, createModelCache } from './models-table.js';
import type { ChainedRow } from './chain.js';

export interface RequestFilter {
  model?: string;
  /** Unix ms, inclusive. */
  from?: number;
  /** Unix ms, exclusive. */
  to?: number;
  inDomain?: boolean;
  label?: string;
  /** Every pair must be among the row's tags. */
  tags?: Array<[string, string]>;
}

/** A stored row of scored_requests, as read back: the columns the chain seals. */
type Row = ChainedRow;

// Opaque to clients; the "r1" tag lets the format change later.
export const requestCursor = cursorCodec('r1');
const codec = requestCursor;

/** Pages through the audit log, newest first; the cursor continues where the last page ended. */
export function createRequestQuery(db: Database): (filter: RequestFilter, limit: number, cursor?: string) => RequestPage {
  const model = createModelCache(db);
  return (filter, limit, cursor) => {
    const where: string[] = [];
    const args: unknown[] = [];
    if (cursor !== undefined) {
      where.push('seq < ?');
      args.push(codec.decode(cursor));
    }
    if (filter.model !== undefined) {
      where.push('model_name = ?');
      args.push(filter.model);
    }
    if (filter.from !== undefined) {
      where.push('received_at >= ?');
      args.push(filter.from);
    }
    if (filter.to !== undefined) {
      where.push('received_at < ?');
      args.push(filter.to);
    }
    if (filter.inDomain !== undefined) {
      where.push('in_domain = ?');
      args.push(filter.inDomain ? 1 : 0);
    }
    if (filter.label !== undefined) {
      where.push('label = ?');
      args.push(filter.label);
    }
    for (const [k, v] of filter.tags ?? []) {
      where.push("EXISTS (SELECT 1 FROM json_each(scored_requests.tags) AS t WHERE t.key = ? AND t.value = ? AND t.type = 'text')");
      args.push(k, v);
    }
    const sql = `SELECT * FROM scored_requests ${where.length ? `WHERE ${where.join(' AND ')}` : ''} ORDER BY seq DESC LIMIT ?`;
    const rows = db.prepare(sql).all(...args, limit + 1) as Row[];
    const more = rows.length > limit;
    const page = more ? rows.slice(0, limit) : rows;
    return {
      items: page.map((r) => toItem(r, model(r.model_sha256))),
      next_cursor: more ? codec.encode((page[page.length - 1] as Row).seq) : null,
    };
  };
}

/** A stored row as GET /v1/requests answers it, its vectors named by the model's record. */
export function toItem(r: Row, m: ModelRecord | null): LoggedRequest {
  const features = fromFloat64Blob(r.features);
  const probabilities = fromFloat64Blob(r.probabilities);
  return {
    request_id: r.request_id,
    batch_id: r.batch_id,
    received_at: new Date(r.received_at).toISOString(),
    model: { name: r.model_name, version: r.model_version, sha256: r.model_sha256 },
    features: Object.fromEntries(Array.from(features, (v, j) => [m?.features[j]?.name ?? `feature_${j}`, v])),
    tags: r.tags ? (JSON.parse(r.tags) as Record<string, string>) : {},
    label: r.label,
    probabilities: Object.fromEntries(Array.from(probabilities, (v, k) => [m?.classes[k] ?? `class_${k}`, v])),
    margin: r.margin,
    review: r.review === 1,
    in_domain: r.in_domain === 1,
    domain: JSON.parse(r.domain) as LoggedRequest['domain'],
    latency_ms: r.latency_us / 1000,
    key_label: r.key_label ?? null,
    explained: r.explained === null || r.explained === undefined ? null : r.explained === 1,
  };
}

/** One logged request by its request id, or null. */
export function createRequestLookup(db: Database): (requestId: string) => LoggedRequest | null {
  const model = createModelCache(db);
  const byId = db.prepare('SELECT * FROM scored_requests WHERE request_id = ?');
  return (requestId) => {
    const r = byId.get(requestId) as Row | undefined;
    return r ? toItem(r, model(r.model_sha256)) : null;
  };
}

export { CursorError } from '../cursor.js';
