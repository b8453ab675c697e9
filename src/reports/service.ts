import type { Worker } from 'node:worker_threads';
import { startModuleWorker } from '../worker-boot.js';
import { parseBundle } from '../bundle/verify.js';
import { uuidv7 } from '../ids.js';
import type { Store } from '../store/store.js';
import { buildDriftReport } from './build-report.js';
import { buildOutcomesReport } from './outcomes-report.js';
import type { ReportOptions } from './options.js';
import type { DriftReport } from '../contracts/drift-report.js';
import type { WorkerJob } from './worker.js';

export type ReportTrigger = 'nightly' | 'request' | 'cli' | 'demo';

export class ReportError extends Error {
  constructor(
    message: string,
    readonly reason: 'unknown-model' | 'failed',
  ) {
    super(message);
    this.name = 'ReportError';
  }
}

export interface ReportService {
  /** Builds, stores and returns a report of a model over [from, to), with the bundle the log holds for it. */
  run(model: string, window: { from: number; to: number }, trigger: ReportTrigger, sha256?: string): Promise<DriftReport>;
}

/** The report worker (./worker.ts), with the job as its workerData. */
const startWorker = (job: WorkerJob): Worker => startModuleWorker(import.meta.url, 'worker', { workerData: job });

function inWorker(job: WorkerJob): Promise<DriftReport> {
  return new Promise((resolve, reject) => {
    const worker = startWorker(job);
    worker.once('message', (m: { ok: true; report: DriftReport } | { ok: false; message: string }) => (m.ok ? resolve(m.report) : reject(new ReportError(m.message, 'failed'))));
    worker.once('error', (err) => reject(new ReportError(err.message, 'failed')));
    worker.once('exit', (code) => code !== 0 && reject(new ReportError(`report worker exited with code ${code}`, 'failed')));
  });
}

/**
 * Drift reports over the audit log. With `worker` (the service) each report is built on a worker
 * thread with its own read-only connection; without it (the CLI) in the calling thread.
 */
export function createReportService(store: Store, options: ReportOptions & { worker: boolean }, onStored?: (r: DriftReport) => void): ReportService {
  return {
    async run(model, window, trigger, sha256) {
      const stored = await store.drift.bundleText(model, sha256);
      if (!stored) throw new ReportError(`the audit log holds no bundle for a model named ${JSON.stringify(model)}`, 'unknown-model');
      const meta = { id: uuidv7(), createdAt: new Date() };
      // The worker opens the SQLite file read-only; on PostgreSQL the rows come in pages from a
      // server-side cursor and the builder awaits each, so the event loop keeps scoring meanwhile.
      const report = options.worker && store.kind === 'sqlite'
        ? await inWorker({ dbFile: store.file, bundleText: stored.text, window, meta: { id: meta.id, createdAt: meta.createdAt.toISOString() }, options })
        : await buildDriftReport(store.drift, parseBundle(stored.text, 'stored bundle'), window, meta, options);
      // The outcomes recorded by now for the window's answers, when there are any: read here, on
      // the store's connection, as they are a few rows beside the window's (docs/outcomes.md).
      const logged = await store.outcomes.describeModel(report.model.sha256);
      if (logged) {
        const { model: _m, window: _w, created_at: _c, ...figures } = await buildOutcomesReport(store.outcomes, logged, window, meta.createdAt);
        if (figures.labelled > 0) report.outcomes = figures;
      }
      await store.drift.saveReport({
        id: report.id,
        model_name: report.model.name,
        model_sha256: report.model.sha256,
        window_from: window.from,
        window_to: window.to,
        created_at: meta.createdAt.getTime(),
        trigger,
        report,
      });
      onStored?.(report);
      return report;
    },
  };
}
