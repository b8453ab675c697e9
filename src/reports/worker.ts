// Builds one drift report off the main thread, so that a long window never stalls scoring.
// It opens the database read-only (WAL lets it read while the service writes) and posts the
// report back; the main thread stores it.
import { parentPort, workerData } from 'node:worker_threads';
import { parseBundle } from '../bundle/verify.js';
import { openAuditReader } from '../store/reader.js';
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
const reader = openAuditReader(job.dbFile);
try {
  const report = await buildDriftReport(reader.drift, parseBundle(job.bundleText, 'stored bundle'), job.window, { id: job.meta.id, createdAt: new Date(job.meta.createdAt) }, job.options);
  parentPort?.postMessage({ ok: true, report });
} catch (err) {
  parentPort?.postMessage({ ok: false, message: (err as Error).message });
} finally {
  reader.close();
}
