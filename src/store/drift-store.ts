import type { Awaitable, Sync } from './awaitable.js';
import type { Database, Statement } from 'better-sqlite3';

/** One logged answer as the drift report reads it: only what it needs, the vector still packed. */
export interface ScoredRowView {
  received_at: number;
  features: Buffer;
  label: string;
  margin: number;
  in_domain: number;
  review: number;
}

export interface StoredReport {
  id: string;
  model_name: string;
  model_sha256: string;
  window_from: number;
  window_to: number;
  created_at: number;
  trigger: string;
  report: string;
}

export interface ReportFilter {
  model?: string;
  /** Windows starting at or after, Unix ms. */
  from?: number;
  /** Windows starting before, Unix ms. */
  to?: number;
}

/** The reads and writes drift reports need: the stored bundle, a streaming row iterator, counts, reports. */
export interface DriftStore {
  /** The sealed bundle text of a model: the given sha256, or the one of that name loaded last. */
  bundleText(name: string, sha256?: string): Awaitable<{ sha256: string; text: string } | null>;
  /**
   * Streams the scored rows of one bundle in [from, to), oldest first, without loading them all:
   * synchronously from SQLite (nothing else runs on its connection meanwhile), in pages from a
   * server-side cursor on PostgreSQL.
   */
  scoredRows(sha256: string, from: number, to: number): Iterable<ScoredRowView> | AsyncIterable<ScoredRowView[]>;
  /** Scored rows of the model under other bundles in the window (reported, not analysed). */
  countOtherVersions(name: string, sha256: string, from: number, to: number): Awaitable<number>;
  countRejected(name: string, from: number, to: number): Awaitable<number>;
  saveReport(r: Omit<StoredReport, 'report'> & { report: unknown }): Awaitable<void>;
  getReport(id: string): Awaitable<StoredReport | null>;
  listReports(filter: ReportFilter, limit: number, afterSeq?: number): Awaitable<Array<StoredReport & { seq: number }>>;
  /** Whether a report exists for exactly this model and window (the nightly job's catch-up). */
  hasReport(name: string, from: number, to: number): Awaitable<boolean>;
}

export function createDriftStore(db: Database): Sync<DriftStore> & { scoredRows(sha256: string, from: number, to: number): IterableIterator<ScoredRowView> } {
  const bundleBySha = db.prepare('SELECT sha256, bundle FROM models WHERE sha256 = ? AND bundle IS NOT NULL');
  const bundleByName = db.prepare('SELECT sha256, bundle FROM models WHERE name = ? AND bundle IS NOT NULL ORDER BY last_loaded_at DESC, rowid DESC LIMIT 1');
  const rows: Statement = db.prepare(
    'SELECT received_at, features, label, margin, in_domain, review FROM scored_requests WHERE model_sha256 = ? AND received_at >= ? AND received_at < ? ORDER BY received_at, seq',
  );
  const others = db.prepare('SELECT COUNT(*) AS n FROM scored_requests WHERE model_name = ? AND model_sha256 <> ? AND received_at >= ? AND received_at < ?');
  const rejected = db.prepare('SELECT COUNT(*) AS n FROM rejected_requests WHERE model_name = ? AND received_at >= ? AND received_at < ?');
  const insert = db.prepare(
    `INSERT INTO drift_reports (id, seq, model_name, model_sha256, window_from, window_to, created_at, trigger, report)
     VALUES (?, (SELECT COALESCE(MAX(seq), 0) + 1 FROM drift_reports), ?, ?, ?, ?, ?, ?, ?)`,
  );
  const byId = db.prepare('SELECT id, model_name, model_sha256, window_from, window_to, created_at, trigger, report FROM drift_reports WHERE id = ?');
  const exists = db.prepare('SELECT 1 FROM drift_reports WHERE model_name = ? AND window_from = ? AND window_to = ? LIMIT 1');
  return {
    bundleText(name, sha256) {
      const r = (sha256 ? bundleBySha.get(sha256) : bundleByName.get(name)) as { sha256: string; bundle: string } | undefined;
      return r ? { sha256: r.sha256, text: r.bundle } : null;
    },
    scoredRows: (sha256, from, to) => rows.iterate(sha256, from, to) as IterableIterator<ScoredRowView>,
    countOtherVersions: (name, sha256, from, to) => (others.get(name, sha256, from, to) as { n: number }).n,
    countRejected: (name, from, to) => (rejected.get(name, from, to) as { n: number }).n,
    saveReport(r) {
      insert.run(r.id, r.model_name, r.model_sha256, r.window_from, r.window_to, r.created_at, r.trigger, JSON.stringify(r.report));
    },
    getReport: (id) => (byId.get(id) as StoredReport | undefined) ?? null,
    listReports(filter, limit, afterSeq) {
      const where: string[] = [];
      const args: unknown[] = [];
      if (afterSeq !== undefined) {
        where.push('seq < ?');
        args.push(afterSeq);
      }
      if (filter.model !== undefined) {
        where.push('model_name = ?');
        args.push(filter.model);
      }
      if (filter.from !== undefined) {
        where.push('window_from >= ?');
        args.push(filter.from);
      }
      if (filter.to !== undefined) {
        where.push('window_from < ?');
        args.push(filter.to);
      }
      const sql = `SELECT seq, id, model_name, model_sha256, window_from, window_to, created_at, trigger, report FROM drift_reports ${where.length ? `WHERE ${where.join(' AND ')}` : ''} ORDER BY seq DESC LIMIT ?`;
      return db.prepare(sql).all(...args, limit) as Array<StoredReport & { seq: number }>;
    },
    hasReport: (name, from, to) => exists.get(name, from, to) !== undefined,
  };
}
