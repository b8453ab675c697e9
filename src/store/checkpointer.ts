import { createRequire } from 'node:module';
import { Worker } from 'node:worker_threads';
import type { Database } from 'better-sqlite3';

/** SQLite's own default (PRAGMA wal_autocheckpoint), used again when the worker cannot run. */
const INLINE_PAGES = 1000;

// Plain JavaScript, so that it runs in a worker without a TypeScript loader.
const WORKER = `
const { workerData, parentPort } = require('node:worker_threads');
const Database = require(workerData.module);
const db = new Database(workerData.file, { fileMustExist: true });
db.pragma('busy_timeout = 1000');
const tick = () => {
  try {
    const [r] = db.pragma('wal_checkpoint(PASSIVE)');
    parentPort.postMessage({ ok: true, log: r.log, checkpointed: r.checkpointed });
  } catch (err) {
    parentPort.postMessage({ ok: false, error: err.message });
  }
};
const timer = setInterval(tick, workerData.intervalMs);
parentPort.on('message', (m) => {
  if (m === 'stop') {
    clearInterval(timer);
    db.close();
    parentPort.close();
  }
});
`;

export interface Checkpointer {
  /** Checkpoints run by the worker so far, and the last error it met (null when none). */
  stats(): { runs: number; lastError: string | null; inline: boolean };
  /** Asks the worker to close its connection and end; does not wait. */
  stop(): void;
}

/**
 * Moves WAL checkpoints off the event loop: a worker thread with its own connection runs a
 * PASSIVE checkpoint every intervalMs, which never blocks the writer, and the writing connection
 * stops checkpointing on its commits (wal_autocheckpoint = 0). A checkpoint copies committed
 * pages from the WAL into the database file; it changes nothing of what is committed, so
 * durability is as before. If the worker cannot start or stops, the connection checkpoints on
 * its own again, as SQLite does by default, and `onInline` is told (for other writing connections).
 */
export function startCheckpointer(db: Database, file: string, intervalMs = 1000, onInline?: () => void): Checkpointer {
  let runs = 0;
  let lastError: string | null = null;
  let inline = false;
  const fallBack = (reason: string): void => {
    lastError = reason;
    if (inline) return;
    inline = true;
    try {
      db.pragma(`wal_autocheckpoint = ${INLINE_PAGES}`);
    } catch {
      // the connection is closing
    }
    onInline?.();
  };
  let worker: Worker;
  try {
    worker = new Worker(WORKER, { eval: true, workerData: { file, intervalMs, module: createRequire(import.meta.url).resolve('better-sqlite3') } });
  } catch (err) {
    fallBack((err as Error).message);
    return { stats: () => ({ runs, lastError, inline }), stop: () => undefined };
  }
  worker.unref();
  db.pragma('wal_autocheckpoint = 0');
  worker.on('message', (m: { ok: boolean; error?: string }) => {
    if (m.ok) runs++;
    else lastError = m.error ?? 'checkpoint failed';
  });
  worker.on('error', (err) => fallBack(err.message));
  let stopped = false;
  worker.on('exit', () => {
    if (!stopped) fallBack('the checkpoint worker stopped');
  });
  return {
    stats: () => ({ runs, lastError, inline }),
    stop: () => {
      if (stopped) return;
      stopped = true;
      worker.postMessage('stop');
      // A worker that does not end by itself soon is ended; an interrupted checkpoint is harmless.
      setTimeout(() => void worker.terminate(), 2000).unref();
    },
  };
}
