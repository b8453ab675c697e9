import type { Database } from 'better-sqlite3';
import { type EncodedRow, type RejectedRow, type ScoredRow, createCommitter, encodeRow } from './log-commit.js';
import { type CommitLimits, type Sink, type SinkKind, type WriterThreadOptions, loopSink, threadSink } from './log-sinks.js';
import { DEFAULT_WAL_MAX_BYTES } from './wal-bound.js';

export type { WriterThreadOptions } from './log-sinks.js';

export type { RejectedRow, ScoredRow } from './log-commit.js';

/** How the log groups its commits; flushRows, rejectedRows and walMaxBytes as in CommitLimits. */
export interface WriterOptions extends CommitLimits {
  /** Wait this long for more rows before committing; 0 commits on the next turn of the event loop. */
  flushMs: number;
  /** Rows allowed to wait; beyond it append() refuses at once. */
  queueRows: number;
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
  /** Where the commits run: on a thread of their own, or on the event loop. */
  writer: SinkKind;
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
  /** Whether the writing connection checkpoints the WAL itself (SQLite's default, and wal-bound.ts). */
  autocheckpoint(on: boolean): void;
  /**
   * Stops acknowledging for good: the database's files were replaced or removed under the
   * service, so a commit may land where no restart will find it. Appends are refused, and rows
   * whose commit is in flight are failed even if committed (a 503 may be answered for a row that
   * is in the log; never a 200 for one that may not be).
   */
  fence(reason: string): void;
}

/** What the store hears from the log, and how it holds it (all optional: the CLI gives none). */
export interface LogHooks {
  /** After each batch: null when its commits succeeded, else the storage error that failed them. */
  onStorage?(error: string | null): void;
  /**
   * The WAL's size after a commit; a promise returned holds the next commit until it settles
   * (wal-bound.ts createWalGate). `settled` resolves once the batches already on their way to the
   * writer thread are committed: the checkpoint waits for them, or it would race their appends.
   * Given only while a checkpoint thread runs.
   */
  walGate?(walBytes: number, settled: () => Promise<void>): Promise<void> | null;
}

/**
 * Group commit: requests queue their rows and one writer commits everything waiting in one
 * transaction, on the next turn of the event loop (or after flushMs), so that one commit serves
 * many requests. A request is answered only after its rows are committed. If a transaction fails,
 * each request's rows are retried alone so that one bad request cannot fail the others. With
 * `thread`, the commits run on a worker thread of their own (the service); without it, or when
 * that thread fails, on the event loop with `db` (the CLI, tests).
 */
export function createRequestLog(db: Database, options: WriterOptions, thread?: WriterThreadOptions, hooks: LogHooks = {}): RequestLog {
  let queue: Pending[] = [];
  /** Set once the files were replaced under the log: nothing is acknowledged after. */
  let fenced: string | null = null;
  /** A checkpoint the next commit waits for (wal-bound.ts); rows queue meanwhile. */
  let held: Promise<void> | null = null;
  let rejected: RejectedRow[] = [];
  /** Rows queued or in flight. */
  let waiting = 0;
  let timer: NodeJS.Timeout | NodeJS.Immediate | null = null;
  let timerImmediate = false;
  let closed = false;
  const stats: Omit<LogStats, 'waitingRows' | 'writer'> = { committedRows: 0, failedRows: 0, transactions: 0, failedTransactions: 0, lastError: null };
  const onLoop = (): Sink =>
    loopSink(createCommitter(db, { ...options, wal: { file: db.name, maxBytes: options.walMaxBytes ?? DEFAULT_WAL_MAX_BYTES, inline: hooks.walGate === undefined || (thread?.autocheckpoint ?? false) } }));
  let sink: Sink;
  if (thread) {
    sink = threadSink(
      thread,
      options,
      () => {
        if (queue.length > 0 || rejected.length > 0) flushNow();
      },
      (reason) => {
        stats.lastError = reason;
        sink = onLoop();
        // The rows that waited for the thread go now, on the event loop.
        if (queue.length > 0 || rejected.length > 0) schedule();
      },
    );
  } else {
    sink = onLoop();
  }

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
    timer = urgent ? setImmediate(flushNow) : setTimeout(flushNow, options.flushMs);
    timerImmediate = urgent;
  };

  function flushNow(): void {
    cancel();
    if (held !== null || sink.busy() || (queue.length === 0 && rejected.length === 0)) return;
    const pending: Pending[] = [];
    const requests: EncodedRow[][] = [];
    for (const p of queue) {
      try {
        // Rows posted to the writer thread get vectors of their own; on the event loop they are read in place.
        requests.push(p.rows.map((r) => encodeRow(r, sink.kind === 'thread')));
        pending.push(p);
      } catch (err) {
        waiting -= p.rows.length;
        stats.failedRows += p.rows.length;
        p.reject(new LogWriteError(err));
      }
    }
    const refused = rejected;
    queue = [];
    rejected = [];
    sink.send(requests, refused, (o) => {
      stats.transactions += o.transactions;
      stats.failedTransactions += o.failedTransactions;
      if (o.lastError !== null) stats.lastError = o.lastError;
      if (o.storageError !== null) hooks.onStorage?.(o.storageError);
      else if (o.transactions > 0) hooks.onStorage?.(null);
      if (o.walBytes > 0 && held === null && !closed) {
        const hold = hooks.walGate?.(o.walBytes, () => sink.idle()) ?? null;
        if (hold !== null) {
          held = hold;
          void hold.finally(() => {
            // flush() may have let go of this hold, and a later commit taken another.
            if (held === hold) held = null;
            if (queue.length > 0 || rejected.length > 0) schedule();
          });
        }
      }
      const failed = new Map(o.failed.map((f) => [f.index, f.message]));
      pending.forEach((p, i) => {
        waiting -= p.rows.length;
        const message = fenced ?? failed.get(i);
        if (message === undefined) {
          stats.committedRows += p.rows.length;
          p.resolve();
        } else {
          stats.failedRows += p.rows.length;
          p.reject(new LogWriteError(new Error(message)));
        }
      });
    });
  }

  return {
    append(rows) {
      if (closed) return Promise.reject(new LogClosedError());
      if (fenced !== null) return Promise.reject(new LogWriteError(new Error(fenced)));
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
      // Synchronous: a held commit goes now (at shutdown a checkpoint is not worth the wait).
      held = null;
      do {
        flushNow();
        sink.drain();
      } while (queue.length > 0 || rejected.length > 0);
    },
    stats: () => ({ ...stats, waitingRows: waiting, writer: sink.kind }),
    close() {
      if (closed) return;
      this.flush();
      closed = true;
      sink.close();
    },
    autocheckpoint: (on) => sink.autocheckpoint(on),
    fence(reason) {
      if (fenced !== null) return;
      fenced = reason;
      stats.lastError = reason;
      // What waits in the queue is refused now; what is in flight is failed when it comes back.
      const waitingNow = queue;
      queue = [];
      for (const p of waitingNow) {
        waiting -= p.rows.length;
        stats.failedRows += p.rows.length;
        p.reject(new LogWriteError(new Error(reason)));
      }
    },
  };
}

