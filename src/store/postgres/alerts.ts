import type { AlertRow, AlertsStore, NewDelivery, OutboxRow } from '../alerts-store.js';
import type { Pool, PoolClient } from './pool.js';

/**
 * How long a replica holds the deliveries it took (wall clock). Longer than any receiver's
 * timeout (alerts.webhooks.*.timeout_s is at most 120 s): a replica killed while delivering leaves
 * its rows to another after this, with the same event id (at least once).
 */
export const LEASE_MS = 180_000;

/**
 * The evaluator joins rule and model with a NUL, which PostgreSQL's TEXT cannot hold; rule and
 * model names never contain "/" (src/config/alert-rules.ts, the bundle name pattern), so it
 * stands in for it without two keys becoming one.
 */
const storedKey = (key: string): string => key.replaceAll('\u0000', '/');

async function queue(client: PoolClient, deliveries: NewDelivery[], now: number): Promise<void> {
  for (const d of deliveries) {
    await client.query(
      `INSERT INTO outbox (event_id, webhook, ordering_key, body, status, created_at, next_attempt_at) VALUES ($1, $2, $3, $4, 'pending', $5, $5)`,
      [d.eventId, d.webhook, storedKey(d.orderingKey), d.body, now],
    );
  }
}

async function inTransaction(pool: Pool, work: (c: PoolClient) => Promise<void>): Promise<void> {
  const client = await pool.connect();
  let broken: Error | undefined;
  try {
    await client.query('BEGIN');
    await work(client);
    await client.query('COMMIT');
  } catch (err) {
    broken = err as Error;
    await client.query('ROLLBACK').catch(() => undefined);
    throw err;
  } finally {
    client.release(broken);
  }
}

/**
 * The alerts' store on the server. dueDeliveries for one webhook leases what it returns
 * (FOR UPDATE SKIP LOCKED, then lease_until): replicas delivering at once take different rows,
 * and each row is attempted by one replica at a time. Without a webhook it only looks.
 */
export function createServerAlertsStore(pool: Pool, wallClock: () => number = Date.now): AlertsStore {
  const one = async <T>(sql: string, values: unknown[] = []): Promise<T> => (await pool.query(sql, values)).rows[0] as T;
  const dueWhere = `o.status = 'pending' AND o.next_attempt_at <= $1 AND (o.lease_until IS NULL OR o.lease_until <= $2)
    AND NOT EXISTS (SELECT 1 FROM outbox p WHERE p.status = 'pending' AND p.webhook = o.webhook AND p.ordering_key = o.ordering_key AND p.seq < o.seq)`;
  return {
    async windowCounts(model, from, to) {
      const r = await one<{ scored: number; ood: number; review: number; margin: number }>(
        `SELECT COUNT(*) AS scored, COALESCE(SUM(1 - in_domain), 0)::float8 AS ood, COALESCE(SUM(review), 0)::float8 AS review, COALESCE(SUM(margin), 0) AS margin
         FROM scored_requests WHERE model_name = $1 AND received_at >= $2 AND received_at < $3`,
        [model, from, to],
      );
      return { scored: r.scored, outOfDomain: r.ood, review: r.review, marginSum: r.margin };
    },
    labelCount: async (model, label, from, to) => (await one<{ n: number }>('SELECT COUNT(*) AS n FROM scored_requests WHERE model_name = $1 AND label = $2 AND received_at >= $3 AND received_at < $4', [model, label, from, to])).n,
    rejectedCount: async (model, from, to) => (await one<{ n: number }>('SELECT COUNT(*) AS n FROM rejected_requests WHERE model_name = $1 AND received_at >= $2 AND received_at < $3', [model, from, to])).n,
    latestReport: async (model) => (await one<{ report: string } | undefined>('SELECT report FROM drift_reports WHERE model_name = $1 ORDER BY seq DESC LIMIT 1', [model]))?.report ?? null,
    openAlerts: async () => (await pool.query('SELECT * FROM alerts WHERE cleared_at IS NULL ORDER BY seq')).rows as AlertRow[],
    raise: (a, deliveries, now) =>
      inTransaction(pool, async (c) => {
        await c.query(
          `INSERT INTO alerts (id, rule, model_name, signal, direction, threshold, window_ms, raised_value, raised_at) VALUES ($1, $2, $3, $4, $5, $6, $7, $8, $9)`,
          [a.id, a.rule, a.model_name, a.signal, a.direction, a.threshold, a.window_ms, a.raised_value, a.raised_at],
        );
        await queue(c, deliveries, now);
      }),
    clear: (id, value, at, deliveries) =>
      inTransaction(pool, async (c) => {
        // Cleared once: a second replica clearing the same alert changes nothing and queues nothing.
        const r = await c.query('UPDATE alerts SET cleared_value = $1, cleared_at = $2 WHERE id = $3 AND cleared_at IS NULL', [value, at, id]);
        if (r.rowCount === 1) await queue(c, deliveries, at);
      }),
    async listAlerts(filter, limit, beforeSeq) {
      const where: string[] = [];
      const args: unknown[] = [];
      const arg = (v: unknown): string => `$${args.push(v)}`;
      if (beforeSeq !== undefined) where.push(`seq < ${arg(beforeSeq)}`);
      if (filter.state === 'raised') where.push('cleared_at IS NULL');
      if (filter.state === 'cleared') where.push('cleared_at IS NOT NULL');
      if (filter.model !== undefined) where.push(`model_name = ${arg(filter.model)}`);
      if (filter.from !== undefined) where.push(`raised_at >= ${arg(filter.from)}`);
      if (filter.to !== undefined) where.push(`raised_at < ${arg(filter.to)}`);
      return (await pool.query(`SELECT * FROM alerts ${where.length ? `WHERE ${where.join(' AND ')}` : ''} ORDER BY seq DESC LIMIT ${arg(limit)}`, args)).rows as AlertRow[];
    },
    async dueDeliveries(now, limit, webhook) {
      const wall = wallClock();
      if (webhook === undefined) {
        return (await pool.query(`SELECT o.* FROM outbox o WHERE ${dueWhere} ORDER BY o.seq LIMIT $3`, [now, wall, limit])).rows as OutboxRow[];
      }
      const r = await pool.query(
        `WITH due AS (SELECT o.seq FROM outbox o WHERE ${dueWhere} AND o.webhook = $3 ORDER BY o.seq LIMIT $4 FOR UPDATE SKIP LOCKED)
         UPDATE outbox SET lease_until = $5 FROM due WHERE outbox.seq = due.seq RETURNING outbox.*`,
        [now, wall, webhook, limit, wall + LEASE_MS],
      );
      return (r.rows as OutboxRow[]).sort((a, b) => a.seq - b.seq);
    },
    markDelivered: async (seq, at) => void (await pool.query("UPDATE outbox SET status = 'delivered', delivered_at = $1, attempts = attempts + 1, last_error = NULL, lease_until = NULL WHERE seq = $2", [at, seq])),
    markRetry: async (seq, attempts, next, error) => void (await pool.query('UPDATE outbox SET attempts = $1, next_attempt_at = $2, last_error = $3, lease_until = NULL WHERE seq = $4', [attempts, next, error.slice(0, 500), seq])),
    markFailed: async (seq, attempts, error) => void (await pool.query("UPDATE outbox SET status = 'failed', attempts = $1, last_error = $2, lease_until = NULL WHERE seq = $3", [attempts, error.slice(0, 500), seq])),
    pendingDeliveries: async () => (await one<{ n: number }>("SELECT COUNT(*) AS n FROM outbox WHERE status = 'pending'")).n,
    deliveries: async () => (await pool.query('SELECT seq, event_id, webhook, ordering_key, body, status, attempts, created_at, next_attempt_at, delivered_at, last_error FROM outbox ORDER BY seq')).rows as OutboxRow[],
  };
}
