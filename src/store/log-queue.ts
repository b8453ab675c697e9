import { type EncodedRow, type RejectedRow, type ScoredRow, encodeRow } from './log-commit.js';

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

/** What a log has done so far, whatever its store. */
export interface LogCounts {
  committedRows: number;
  failedRows: number;
  transactions: number;
  /** Transactions that rolled back. */
  failedTransactions: number;
  lastError: string | null;
}

interface Pending {
  rows: ScoredRow[];
  resolve: () => void;
  reject: (err: Error) => void;
}

/** Requests taken from the queue for one commit: `requests[i]` holds the encoded rows of request i. */
export interface Taken {
  requests: EncodedRow[][];
  refused: RejectedRow[];
  /** Answers the requests taken: `failed` maps a request's index to why it is not in the log. */
  settle(failed: ReadonlyMap<number, string>): void;
}

/**
 * The requests waiting for the audit log's next commit, shared by the SQLite and the PostgreSQL
 * log: admission (closed, fenced, the queue bound), refusals kept best effort, and each request's
 * answer once its commit comes back. A request's promise resolves only when `settle` finds it
 * committed and the log was not fenced meanwhile; otherwise it rejects with LogWriteError.
 * `wake` is called whenever work arrives; the log decides when to commit.
 */
export function createLogQueue(queueRows: number, wake: () => void) {
  let queue: Pending[] = [];
  let rejected: RejectedRow[] = [];
  /** Rows queued or in flight. */
  let waiting = 0;
  let closed = false;
  /** Set once the files were replaced under the log: nothing is acknowledged after. */
  let fenced: string | null = null;
  const counts: LogCounts = { committedRows: 0, failedRows: 0, transactions: 0, failedTransactions: 0, lastError: null };

  const fail = (p: Pending, err: Error): void => {
    waiting -= p.rows.length;
    counts.failedRows += p.rows.length;
    p.reject(err);
  };

  return {
    counts,
    waiting: (): number => waiting,
    hasWork: (): boolean => queue.length > 0 || rejected.length > 0,
    isClosed: (): boolean => closed,
    close(): void {
      closed = true;
    },

    append(rows: ScoredRow[]): Promise<void> {
      if (closed) return Promise.reject(new LogClosedError());
      if (fenced !== null) return Promise.reject(new LogWriteError(new Error(fenced)));
      if (waiting + rows.length > queueRows) return Promise.reject(new LogBackpressureError(waiting));
      return new Promise<void>((resolve, reject) => {
        queue.push({ rows, resolve, reject });
        waiting += rows.length;
        wake();
      });
    },

    appendRejected(row: RejectedRow): void {
      if (closed) return;
      // Bounded: under a flood of garbage, refusals beyond the queue bound go unrecorded; scored rows never do.
      if (rejected.length < queueRows) rejected.push(row);
      wake();
    },

    /**
     * Takes whole requests from the front of the queue, up to `maxRows` rows (at least one
     * request), and every refusal waiting. A request whose rows cannot be encoded fails at once.
     * `ownVectors` copies the vectors (rows posted to another thread); otherwise they are read in place.
     */
    take(ownVectors: boolean, maxRows = Number.POSITIVE_INFINITY): Taken {
      const pending: Pending[] = [];
      const requests: EncodedRow[][] = [];
      let rows = 0;
      let i = 0;
      for (; i < queue.length; i++) {
        const p = queue[i] as Pending;
        if (rows > 0 && rows + p.rows.length > maxRows) break;
        try {
          requests.push(p.rows.map((r) => encodeRow(r, ownVectors)));
          pending.push(p);
          rows += p.rows.length;
        } catch (err) {
          fail(p, new LogWriteError(err));
        }
      }
      queue = i === queue.length ? [] : queue.slice(i);
      const refused = rejected;
      rejected = [];
      return {
        requests,
        refused,
        settle(failed) {
          pending.forEach((p, j) => {
            const message = fenced ?? failed.get(j);
            if (message === undefined) {
              waiting -= p.rows.length;
              counts.committedRows += p.rows.length;
              p.resolve();
            } else {
              fail(p, new LogWriteError(new Error(message)));
            }
          });
        },
      };
    },

    /**
     * Stops acknowledging for good: what waits is refused now, and what is in flight is failed
     * when its commit comes back, even if it committed.
     */
    fence(reason: string): void {
      if (fenced !== null) return;
      fenced = reason;
      counts.lastError = reason;
      const waitingNow = queue;
      queue = [];
      for (const p of waitingNow) fail(p, new LogWriteError(new Error(reason)));
    },
  };
}

export type LogQueue = ReturnType<typeof createLogQueue>;
