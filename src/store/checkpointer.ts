import type { Worker } from 'node:worker_threads';
import type { Database } from 'better-sqlite3';
import { startModuleWorker } from '../worker-boot.js';
import type { CheckpointerAnswer, CheckpointerData, CheckpointerRequest } from './checkpoint-worker.js';

/** SQLite's own default (PRAGMA wal_autocheckpoint), used again when the worker cannot run. */
const INLINE_PAGES = 1000;
/** The longest a full pass may hold the request log; past it the log goes on without it. */
const FINISH_LIMIT_MS = 5000;

export interface CheckpointerStats {
  /** Checkpoints run by the worker so far, and the last error it met (null when none). */
  runs: number;
  lastError: string | null;
  inline: boolean;
  /** Full passes run for the request log (wal-bound.ts), and those that copied everything. */
  finished: number;
  complete: number;
  /** The WAL file's size after the last pass. */
  walBytes: number;
}

export interface Checkpointer {
  stats(): CheckpointerStats;
  /**
   * A checkpoint now, while the caller appends nothing; resolves when it is done (or after
   * FINISH_LIMIT_MS, or at once without a worker). Calls while one runs share it.
   */
  finish(): Promise<void>;
  /** Asks the worker to close its connection and end; does not wait. */
  stop(): void;
}

export interface CheckpointerOptions {
  file: string;
  intervalMs?: number;
  /** Where to keep the chain head after each checkpoint (head-file.ts). */
  headFile?: string | null;
  /** The worker stopped: the connections checkpoint on their own again. */
  onInline?: () => void;
}

/**
 * Moves WAL checkpoints off the event loop: a worker thread with its own connection
 * (checkpoint-worker.ts) runs a PASSIVE checkpoint every intervalMs, which never blocks the
 * writer, and the writing connection stops checkpointing on its commits (wal_autocheckpoint = 0).
 * A checkpoint copies committed pages from the WAL into the database file; it changes nothing of
 * what is committed, so durability is as before. If the worker cannot start or stops, the
 * connection checkpoints on its own again, as SQLite does by default, and `onInline` is told
 * (for other writing connections).
 */
export function startCheckpointer(db: Database, options: CheckpointerOptions): Checkpointer {
  const stats: CheckpointerStats = { runs: 0, lastError: null, inline: false, finished: 0, complete: 0, walBytes: 0 };
  const waiting = new Map<number, () => void>();
  let nextId = 1;
  let running: Promise<void> | null = null;
  const releaseAll = (): void => {
    for (const resolve of waiting.values()) resolve();
    waiting.clear();
  };
  const fallBack = (reason: string): void => {
    stats.lastError = reason;
    releaseAll();
    if (stats.inline) return;
    stats.inline = true;
    try {
      db.pragma(`wal_autocheckpoint = ${INLINE_PAGES}`);
    } catch {
      // the connection is closing
    }
    options.onInline?.();
  };
  const data: CheckpointerData = { file: options.file, intervalMs: options.intervalMs ?? 1000, headFile: options.headFile ?? null };
  let worker: Worker;
  try {
    worker = startModuleWorker(import.meta.url, 'checkpoint-worker', { workerData: data });
  } catch (err) {
    fallBack((err as Error).message);
    return { stats: () => ({ ...stats }), finish: () => Promise.resolve(), stop: () => undefined };
  }
  worker.unref();
  db.pragma('wal_autocheckpoint = 0');
  worker.on('message', (m: CheckpointerAnswer) => {
    if (m.type === 'pass') {
      if (m.ok) {
        stats.runs++;
        stats.walBytes = m.walBytes;
      } else stats.lastError = m.error;
    } else if (m.type === 'finished') {
      stats.finished++;
      if (m.complete) stats.complete++;
      stats.walBytes = m.walBytes;
      waiting.get(m.id)?.();
      waiting.delete(m.id);
    }
  });
  worker.on('error', (err) => fallBack(err.message));
  let stopped = false;
  worker.on('exit', () => {
    if (!stopped) fallBack('the checkpoint worker stopped');
    releaseAll();
  });
  const post = (m: CheckpointerRequest): void => worker.postMessage(m);
  return {
    stats: () => ({ ...stats }),
    finish() {
      if (stopped || stats.inline) return Promise.resolve();
      running ??= new Promise<void>((resolve) => {
        const id = nextId++;
        const timer = setTimeout(() => {
          waiting.delete(id);
          resolve();
        }, FINISH_LIMIT_MS);
        timer.unref();
        waiting.set(id, () => {
          clearTimeout(timer);
          resolve();
        });
        post({ type: 'finish', id });
      }).finally(() => {
        running = null;
      });
      return running;
    },
    stop: () => {
      if (stopped) return;
      stopped = true;
      releaseAll();
      post({ type: 'stop' });
      // A worker that does not end by itself soon is ended; an interrupted checkpoint is harmless.
      setTimeout(() => void worker.terminate(), 2000).unref();
    },
  };
}
