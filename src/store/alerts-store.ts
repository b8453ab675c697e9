import type { Database } from 'better-sqlite3';
import type { Awaitable, Sync } from './awaitable.js';

export interface WindowCounts {
  scored: number;
  outOfDomain: number;
  review: number;
  marginSum: number;
}

export interface AlertRow {
  id: string;
  seq: number;
  rule: string;
  model_name: string;
  signal: string;
  direction: 'above' | 'below';
  threshold: number;
  window_ms: number;
  raised_value: number;
  raised_at: number;
  cleared_value: number | null;
  cleared_at: number | null;
}

export interface OutboxRow {
  seq: number;
  event_id: string;
  webhook: string;
  ordering_key: string;
  body: string;
  status: 'pending' | 'delivered' | 'failed';
  attempts: number;
  created_at: number;
  next_attempt_at: number;
  delivered_at: number | null;
  last_error: string | null;
}

export interface NewDelivery {
  eventId: string;
  webhook: string;
  orderingKey: string;
  body: string;
}

export interface AlertFilter {
  state?: 'raised' | 'cleared';
  model?: string;
  from?: number;
  to?: number;
}

/** The alerts' reads and writes: window aggregates, the alert records and the durable outbox. */
export interface AlertsStore {
  windowCounts(model: string, from: number, to: number): Awaitable<WindowCounts>;
  labelCount(model: string, label: string, from: number, to: number): Awaitable<number>;
  rejectedCount(model: string, from: number, to: number): Awaitable<number>;
  /** The report JSON of the newest drift report of a model, if any. */
  latestReport(model: string): Awaitable<string | null>;
  openAlerts(): Awaitable<AlertRow[]>;
  /** Records a raised alert and queues its deliveries, in one transaction. */
  raise(alert: Omit<AlertRow, 'seq' | 'cleared_value' | 'cleared_at'>, deliveries: NewDelivery[], now: number): Awaitable<void>;
  /** Records a clear and queues its deliveries, in one transaction. */
  clear(id: string, value: number, at: number, deliveries: NewDelivery[]): Awaitable<void>;
  listAlerts(filter: AlertFilter, limit: number, beforeSeq?: number): Awaitable<AlertRow[]>;
  /** Pending deliveries due now, each the oldest pending one of its webhook and ordering key; of one webhook when given. */
  dueDeliveries(now: number, limit: number, webhook?: string): Awaitable<OutboxRow[]>;
  markDelivered(seq: number, at: number): Awaitable<void>;
  markRetry(seq: number, attempts: number, next: number, error: string): Awaitable<void>;
  markFailed(seq: number, attempts: number, error: string): Awaitable<void>;
  pendingDeliveries(): Awaitable<number>;
  deliveries(): Awaitable<OutboxRow[]>;
}

export function createAlertsStore(db: Database): Sync<AlertsStore> {
  const counts = db.prepare(
    `SELECT COUNT(*) AS scored, COALESCE(SUM(in_domain = 0), 0) AS ood, COALESCE(SUM(review), 0) AS review, COALESCE(SUM(margin), 0) AS margin
     FROM scored_requests WHERE model_name = ? AND received_at >= ? AND received_at < ?`,
  );
  const labels = db.prepare('SELECT COUNT(*) AS n FROM scored_requests WHERE model_name = ? AND label = ? AND received_at >= ? AND received_at < ?');
  const rejected = db.prepare('SELECT COUNT(*) AS n FROM rejected_requests WHERE model_name = ? AND received_at >= ? AND received_at < ?');
  const latest = db.prepare('SELECT report FROM drift_reports WHERE model_name = ? ORDER BY seq DESC LIMIT 1');
  const open = db.prepare('SELECT * FROM alerts WHERE cleared_at IS NULL ORDER BY seq');
  const insertAlert = db.prepare(
    `INSERT INTO alerts (id, seq, rule, model_name, signal, direction, threshold, window_ms, raised_value, raised_at)
     VALUES (@id, (SELECT COALESCE(MAX(seq), 0) + 1 FROM alerts), @rule, @model_name, @signal, @direction, @threshold, @window_ms, @raised_value, @raised_at)`,
  );
  const clearAlert = db.prepare('UPDATE alerts SET cleared_value = ?, cleared_at = ? WHERE id = ? AND cleared_at IS NULL');
  const enqueue = db.prepare(
    `INSERT INTO outbox (event_id, webhook, ordering_key, body, status, created_at, next_attempt_at)
     VALUES (?, ?, ?, ?, 'pending', ?, ?)`,
  );
  const due = db.prepare(
    `SELECT * FROM outbox o WHERE o.status = 'pending' AND o.next_attempt_at <= ? AND (? IS NULL OR o.webhook = ?)
       AND NOT EXISTS (SELECT 1 FROM outbox p WHERE p.status = 'pending' AND p.webhook = o.webhook AND p.ordering_key = o.ordering_key AND p.seq < o.seq)
     ORDER BY o.seq LIMIT ?`,
  );
  const delivered = db.prepare("UPDATE outbox SET status = 'delivered', delivered_at = ?, attempts = attempts + 1, last_error = NULL WHERE seq = ?");
  const retry = db.prepare('UPDATE outbox SET attempts = ?, next_attempt_at = ?, last_error = ? WHERE seq = ?');
  const failed = db.prepare("UPDATE outbox SET status = 'failed', attempts = ?, last_error = ? WHERE seq = ?");
  const pending = db.prepare("SELECT COUNT(*) AS n FROM outbox WHERE status = 'pending'");
  const queue = (deliveries: NewDelivery[], now: number): void => {
    for (const d of deliveries) enqueue.run(d.eventId, d.webhook, d.orderingKey, d.body, now, now);
  };
  const raiseTx = db.transaction((alert: Omit<AlertRow, 'seq' | 'cleared_value' | 'cleared_at'>, deliveries: NewDelivery[], now: number) => {
    insertAlert.run(alert);
    queue(deliveries, now);
  });
  const clearTx = db.transaction((id: string, value: number, at: number, deliveries: NewDelivery[]) => {
    clearAlert.run(value, at, id);
    queue(deliveries, at);
  });
  return {
    windowCounts(model, from, to) {
      const r = counts.get(model, from, to) as { scored: number; ood: number; review: number; margin: number };
      return { scored: r.scored, outOfDomain: r.ood, review: r.review, marginSum: r.margin };
    },
    labelCount: (model, label, from, to) => (labels.get(model, label, from, to) as { n: number }).n,
    rejectedCount: (model, from, to) => (rejected.get(model, from, to) as { n: number }).n,
    latestReport: (model) => (latest.get(model) as { report: string } | undefined)?.report ?? null,
    openAlerts: () => open.all() as AlertRow[],
    raise: (alert, deliveries, now) => raiseTx(alert, deliveries, now),
    clear: (id, value, at, deliveries) => clearTx(id, value, at, deliveries),
    listAlerts(filter, limit, beforeSeq) {
      const where: string[] = [];
      const args: unknown[] = [];
      if (beforeSeq !== undefined) {
        where.push('seq < ?');
        args.push(beforeSeq);
      }
      if (filter.state === 'raised') where.push('cleared_at IS NULL');
      if (filter.state === 'cleared') where.push('cleared_at IS NOT NULL');
      if (filter.model !== undefined) {
        where.push('model_name = ?');
        args.push(filter.model);
      }
      if (filter.from !== undefined) {
        where.push('raised_at >= ?');
        args.push(filter.from);
      }
      if (filter.to !== undefined) {
        where.push('raised_at < ?');
        args.push(filter.to);
      }
      return db.prepare(`SELECT * FROM alerts ${where.length ? `WHERE ${where.join(' AND ')}` : ''} ORDER BY seq DESC LIMIT ?`).all(...args, limit) as AlertRow[];
    },
    dueDeliveries: (now, limit, webhook) => due.all(now, webhook ?? null, webhook ?? null, limit) as OutboxRow[],
    markDelivered: (seq, at) => void delivered.run(at, seq),
    markRetry: (seq, attempts, next, error) => void retry.run(attempts, next, error.slice(0, 500), seq),
    markFailed: (seq, attempts, error) => void failed.run(attempts, error.slice(0, 500), seq),
    pendingDeliveries: () => (pending.get() as { n: number }).n,
    deliveries: () => db.prepare('SELECT * FROM outbox ORDER BY seq').all() as OutboxRow[],
  };
}
