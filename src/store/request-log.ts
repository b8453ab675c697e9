import type { Database } from 'better-sqlite3';
import { type RejectedRow, type ScoredRow, createCommitter } from './log-commit.js';
import { type LogCounts, createLogQueue } from './log-queue.js';
import { type CommitLimits, type Sink, type SinkKind, type WriterThreadOptions, loopSink, threadSink } from './log-sinks.js';
import { DEFAULT_WAL_MAX_BYTES } from './wal-bound.js';

export type { WriterThreadOptions } from './log-sinks.js';

export type { RejectedRow, ScoredRow } from './log-commit.js';
export { LogBackpressureError, LogClosedError, LogWriteError } from './log-queue.js';

/** How the log groups its commits; flushRows, rejectedRows and walMaxBytes as in CommitLimits. */
export interface WriterOptions extends CommitLimits {
  /** Wait this long for more rows before committing; 0 commits on the next turn of the event loop. */
  flushMs: number;
  /** Rows allowed to wait; beyond it append() refuses at once. */
  queueRows: number;
}

export interface LogStats extends LogCounts {
  waitingRows: number;
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
  const queue = createLogQueue(options.queueRows, () => schedule());
  const stats = queue.counts;
  /** A checkpoint the next commit waits for (wal-bound.ts); rows queue meanwhile. */
  let held: Promise<void> | null = null;
  let timer: NodeJS.Timeout | NodeJS.Immediate | null = null;
  let timerImmediate = false;
  const onLoop = (): Sink =>
    loopSink(createCommitter(db, { ...options, wal: { file: db.name, maxBytes: options.walMaxBytes ?? DEFAULT_WAL_MAX_BYTES, inline: hooks.walGate === undefined || (thread?.autocheckpoint ?? false) } }));
  let sink: Sink;
  if (thread) {
    sink = threadSink(
      thread,
      options,
      () => {
        if (queue.hasWork()) flushNow();
      },
      (reason) => {
        stats.lastError = reason;
        sink = onLoop();
        // The rows that waited for the thread go now, on the event loop.
        if (queue.hasWork()) schedule();
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
  function schedule(): void {
    const urgent = options.flushMs === 0 || queue.waiting() >= options.flushRows;
    if (timer !== null && (timerImmediate || !urgent)) return;
    cancel();
    timer = urgent ? setImmediate(flushNow) : setTimeout(flushNow, options.flushMs);
    timerImmediate = urgent;
  }

  function flushNow(): void {
    cancel();
    if (held !== null || sink.busy() || !queue.hasWork()) return;
    // Rows posted to the writer thread get vectors of their own; on the event loop they are read in place.
    const taken = queue.take(sink.kind === 'thread');
    sink.send(taken.requests, taken.refused, (o) => {
      stats.transactions += o.transactions;
      stats.failedTransactions += o.failedTransactions;
      if (o.lastError !== null) stats.lastError = o.lastError;
      if (o.storageError !== null) hooks.onStorage?.(o.storageError);
      else if (o.transactions > 0) hooks.onStorage?.(null);
      if (o.walBytes > 0 && held === null && !queue.isClosed()) {
        const hold = hooks.walGate?.(o.walBytes, () => sink.idle()) ?? null;
        if (hold !== null) {
          held = hold;
          void hold.finally(() => {
            // flush() may have let go of this hold, and a later commit taken another.
            if (held === hold) held = null;
            if (queue.hasWork()) schedule();
          });
        }
      }
      taken.settle(new Map(o.failed.map((f) => [f.index, f.message])));
    });
  }

  return {
    append: (rows) => queue.append(rows),
    appendRejected: (row) => queue.appendRejected(row),
    flush() {
      // Synchronous: a held commit goes now (at shutdown a checkpoint is not worth the wait).
      held = null;
      do {
        flushNow();
        sink.drain();
      } while (queue.hasWork());
    },
    stats: () => ({ ...stats, waitingRows: queue.waiting(), writer: sink.kind }),
    close() {
      if (queue.isClosed()) return;
      this.flush();
      queue.close();
      sink.close();
    },
    autocheckpoint: (on) => sink.autocheckpoint(on),
    fence: (reason) => queue.fence(reason),
  };
}
