import type { Database, Statement } from 'better-sqlite3';
import { type ChainHead, createChainHeadReader } from './chain-head.js';
import { type ChainedRow, chainHash } from './chain.js';
import { toFloat64Blob } from './float64-blob.js';

export interface ScoredRow {
  requestId: string;
  batchId: string | null;
  receivedAt: number;
  model: { sha256: string; name: string; version: string };
  features: ArrayLike<number>;
  tags: Record<string, string> | null;
  label: string;
  probabilities: ArrayLike<number>;
  margin: number;
  inDomain: boolean;
  review: boolean;
  domain: { checks: unknown[]; outside: unknown[] };
  latencyUs: number;
  /** Label of the API key the request came with; null when keys are not in use. */
  keyLabel?: string | null;
}

export interface RejectedRow {
  requestId: string;
  receivedAt: number;
  method: string;
  route: string;
  modelName: string | null;
  status: number;
  problemType: string;
  bodyBytes: number | null;
}

export interface WriterOptions {
  /** Wait this long for more rows before committing; 0 commits on the next turn of the event loop. */
  flushMs: number;
  /** Rows per transaction at most; reaching it commits without waiting. */
  flushRows: number;
  /** Rows allowed to wait; beyond it append() refuses at once. */
  queueRows: number;
  /** Newest rejected rows kept; null for a tool that must leave the table as it is. */
  rejectedRows: number | null;
}

/** The queue is full: the caller should answer 503 and ask the client to retry. */
export class LogBackpressureError extends Error {
  constructor(readonly waiting: number) {
    super(`the audit log has ${waiting} rows waiting to be written`);
    this.name = 'LogBackpressureError';
  }
}

/** The rows could not be committed; they are not in the log and must not be acknowledged. */
export class LogWriteError extends Error {
  constructor(cause: unknown) {
    super(`the audit log could not be written: ${(cause as Error).message ?? String(cause)}`, { cause });
    this.name = 'LogWriteError';
  }
}

export class LogClosedError extends Error {
  constructor() {
    super('the audit log is closed');
    this.name = 'LogClosedError';
  }
}

interface Pending {
  rows: ScoredRow[];
  resolve: () => void;
  reject: (err: Error) => void;
}

export interface LogStats {
  committedRows: number;
  failedRows: number;
  transactions: number;
  /** Transactions that rolled back. */
  failedTransactions: number;
  waitingRows: number;
  lastError: string | null;
}

export interface RequestLog {
  /**
   * Queues the rows of one request; resolves once they are committed, in one transaction and in
   * the order given. Rejects with LogBackpressureError, LogWriteError or LogClosedError, in which
   * case none of the rows is in the log.
   */
  append(rows: ScoredRow[]): Promise<void>;
  /** Records a refused request; best effort, never delays or fails the caller. */
  appendRejected(row: RejectedRow): void;
  /** Commits whatever waits, now. */
  flush(): void;
  stats(): LogStats;
  /** Commits what waits and refuses further rows. */
  close(): void;
}

/**
 * Group commit: requests queue their rows and a single writer commits everything waiting in one
 * transaction, on the next turn of the event loop (or after flushMs), so that one commit serves
 * many requests. A request is answered only after its rows are committed. If a transaction fails,
 * each request's rows are retried alone so that one bad request cannot fail the others.
 */
export function createRequestLog(db: Database, options: WriterOptions): RequestLog {
  const insertScored: Statement = db.prepare(`INSERT INTO scored_requests
    (seq, request_id, batch_id, received_at, model_sha256, model_name, model_version, features, tags, label,
     probabilities, margin, in_domain, review, domain, latency_us, key_label, chain_hash)
    VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`);
  // Every row is sealed with the hash of the one before (src/store/chain.ts).
  const readHead = createChainHeadReader(db);
  const insertRejected: Statement = db.prepare(`INSERT INTO rejected_requests
    (request_id, received_at, method, route, model_name, status, problem_type, body_bytes)
    VALUES (?, ?, ?, ?, ?, ?, ?, ?)`);
  const pruneRejected: Statement = db.prepare('DELETE FROM rejected_requests WHERE seq <= (SELECT MAX(seq) FROM rejected_requests) - ?');

  let queue: Pending[] = [];
  let rejected: RejectedRow[] = [];
  let waiting = 0;
  let timer: NodeJS.Timeout | NodeJS.Immediate | null = null;
  let closed = false;
  let rejectedSincePrune = 0;
  const stats: LogStats = { committedRows: 0, failedRows: 0, transactions: 0, failedTransactions: 0, waitingRows: 0, lastError: null };
  // Also at start: a service that restarts often would otherwise never reach the prune count.
  // Best effort: a locked database now must not stop the service from starting.
  const prune = (): void => {
    if (options.rejectedRows !== null) pruneRejected.run(options.rejectedRows);
  };
  try {
    prune();
  } catch (err) {
    stats.lastError = (err as Error).message;
  }

  /** Inserts a row after `at` in the chain and returns the new head; the caller commits it. */
  const writeScored = (r: ScoredRow, at: ChainHead): ChainHead => {
    const row: ChainedRow = {
      seq: at.seq + 1,
      request_id: r.requestId,
      batch_id: r.batchId,
      received_at: r.receivedAt,
      model_sha256: r.model.sha256,
      model_name: r.model.name,
      model_version: r.model.version,
      features: toFloat64Blob(r.features),
      tags: r.tags ? JSON.stringify(r.tags) : null,
      label: r.label,
      probabilities: toFloat64Blob(r.probabilities),
      margin: r.margin,
      in_domain: r.inDomain ? 1 : 0,
      review: r.review ? 1 : 0,
      domain: JSON.stringify(r.domain),
      latency_us: Math.round(r.latencyUs),
      key_label: r.keyLabel ?? null,
    };
    const hash = chainHash(at.hash, row);
    // Positional parameters: binding by name costs a lookup per column per row.
    insertScored.run(
      row.seq,
      row.request_id,
      row.batch_id,
      row.received_at,
      row.model_sha256,
      row.model_name,
      row.model_version,
      row.features,
      row.tags,
      row.label,
      row.probabilities,
      row.margin,
      row.in_domain,
      row.review,
      row.domain,
      row.latency_us,
      row.key_label,
      hash,
    );
    return { seq: row.seq, hash };
  };
  const writeRejected = (r: RejectedRow): void => {
    insertRejected.run(r.requestId, r.receivedAt, r.method, r.route, r.modelName, r.status, r.problemType, r.bodyBytes);
  };
  // The head is read inside the transaction, so a rolled-back one leaves nothing to undo.
  const commitGroup = db.transaction((group: Pending[], refused: RejectedRow[]): void => {
    if (group.length > 0) {
      let at = readHead();
      for (const p of group) for (const r of p.rows) at = writeScored(r, at);
    }
    for (const r of refused) writeRejected(r);
  });
  const commitOne = db.transaction((p: Pending): void => {
    let at = readHead();
    for (const r of p.rows) at = writeScored(r, at);
  });

  const settle = (group: Pending[]): void => {
    try {
      commitGroup(group, []);
      stats.transactions++;
      for (const p of group) {
        stats.committedRows += p.rows.length;
        p.resolve();
      }
      return;
    } catch (err) {
      stats.lastError = (err as Error).message;
      stats.failedTransactions++;
      // Only a constraint violation belongs to one request's rows. Anything else (a locked or
      // full disk, an I/O error) would fail each retry alike, and retrying one by one would hold
      // the event loop for a busy timeout per request: fail the group at once.
      const code = (err as { code?: string }).code ?? '';
      if (group.length === 1 || !code.startsWith('SQLITE_CONSTRAINT')) {
        for (const p of group) {
          stats.failedRows += p.rows.length;
          p.reject(new LogWriteError(err));
        }
        return;
      }
    }
    // A constraint failed: find the request it belongs to by committing each on its own.
    for (const p of group) {
      try {
        commitOne(p);
        stats.transactions++;
        stats.committedRows += p.rows.length;
        p.resolve();
      } catch (err) {
        stats.failedRows += p.rows.length;
        stats.failedTransactions++;
        stats.lastError = (err as Error).message;
        p.reject(new LogWriteError(err));
      }
    }
  };

  const flush = (): void => {
    timer = null;
    const pending = queue;
    const refused = rejected;
    queue = [];
    rejected = [];
    waiting = 0;
    // Transactions of at most flushRows rows, whole requests only.
    let group: Pending[] = [];
    let rows = 0;
    for (const p of pending) {
      if (rows > 0 && rows + p.rows.length > options.flushRows) {
        settle(group);
        group = [];
        rows = 0;
      }
      group.push(p);
      rows += p.rows.length;
    }
    if (group.length > 0) settle(group);
    if (refused.length > 0) {
      try {
        commitGroup([], refused);
        rejectedSincePrune += refused.length;
        if (rejectedSincePrune >= 1000) {
          prune();
          rejectedSincePrune = 0;
        }
      } catch (err) {
        stats.lastError = (err as Error).message;
      }
    }
  };

  let timerImmediate = false;
  const cancel = (): void => {
    if (timer === null) return;
    if (timerImmediate) clearImmediate(timer as NodeJS.Immediate);
    else clearTimeout(timer as NodeJS.Timeout);
    timer = null;
  };
  const schedule = (): void => {
    const urgent = options.flushMs === 0 || waiting >= options.flushRows;
    if (timer !== null && (timerImmediate || !urgent)) return;
    cancel();
    timer = urgent ? setImmediate(flush) : setTimeout(flush, options.flushMs);
    timerImmediate = urgent;
  };

  return {
    append(rows) {
      if (closed) return Promise.reject(new LogClosedError());
      if (waiting + rows.length > options.queueRows) return Promise.reject(new LogBackpressureError(waiting));
      return new Promise<void>((resolve, reject) => {
        queue.push({ rows, resolve, reject });
        waiting += rows.length;
        schedule();
      });
    },
    appendRejected(row) {
      if (closed) return;
      // Bounded: under a flood of garbage, refusals beyond the queue bound go unrecorded; scored rows never do.
      if (rejected.length < options.queueRows) rejected.push(row);
      schedule();
    },
    flush() {
      cancel();
      flush();
    },
    stats: () => ({ ...stats, waitingRows: waiting }),
    close() {
      if (closed) return;
      this.flush();
      closed = true;
    },
  };
}
