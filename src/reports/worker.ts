// Builds one drift report off the main thread, so that a long window never stalls scoring.
// It opens the database read-only (WAL lets it read while the service writes) and posts the
// report back; the main thread stores it.
import { parentPort, workerData } from 'node:worker_threads';
import BetterSqlite3 from 'better-sqlite3';
import { parseBundle } from '../bundle/verify.js';
import { createDriftStore } from '../store/drift-store.js';
import { buildDriftReport } from './build-report.js';
import type { ReportOptions } from './options.js';

export interface WorkerJob {
  dbFile: string;
  bundleText: string;
  window: { from: number; to: number };
  meta: { id: string; createdAt: string };
  options: ReportOptions;
}

const job = workerData as WorkerJob;
const db = new BetterSqlite3(job.dbFile, { readonly: true, fileMustExist: true });
try {
  const report = buildDriftReport(createDriftStore(db), parseBundle(job.bundleText, 'stored bundle'), job.window, { id: job.meta.id, createdAt: new Date(job.meta.createdAt) }, job.options);
  parentPort?.postMessage({ ok: true, report });
} catch (err) {
  parentPort?.postMessage({ ok: false, message: (err as Error).message });
} finally {
  db.close();
}
