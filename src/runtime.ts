import { type Logger, pino } from 'pino';
import { type Alerting, startAlerting } from './alerts/runtime.js';
import { type ModelEntry, type ModelRegistry, createModelRegistry } from './bundle/registry.js';
import { serializeBundle } from './bundle/write.js';
import type { Config } from './config/config.js';
import type { DriftReport } from './contracts/drift-report.js';
import { type NightlyReports, startNightlyReports } from './jobs/nightly-reports.js';
import { type RetentionJob, startRetention } from './jobs/retention.js';
import { kernelStatus } from './core/wasm/module.js';
import { type Metrics, createMetrics } from './metrics.js';
import { type ReportService, createReportService } from './reports/service.js';
import { type ExplanationService, createExplanationService } from './scoring/explain.js';
import { type ScoringService, createScoringService } from './scoring/service.js';
import type { ModelRecord } from './store/models-table.js';
import type { Store } from './store/contract.js';
import { maskUrl } from './store/location.js';
import { openStoreAt } from './store/open.js';
import type { StoreOptions } from './store/store.js';
import { VERSION } from './version.js';

/** What the routes, the CLI and the jobs are given: every part of a running service. */
export interface Services {
  config: Config;
  store: Store;
  registry: ModelRegistry;
  metrics: Metrics;
  scoring: ScoringService;
  /** Recomputes a logged answer's explanation (GET /v1/requests/{id}/explanation). */
  explanations: ExplanationService;
  reports: ReportService;
  alerting: Alerting;
}

export type ComponentName = keyof Omit<Services, 'config'> | 'jobs';

/** One part of the runtime: what it is called, what it needs open first, and how it closes. */
export interface Component {
  name: ComponentName;
  dependsOn: readonly ComponentName[];
  /** What routes are given under `name`; null for a part they never call (the jobs). */
  value: unknown;
  /** Closes it; a second call does nothing. */
  close(): Promise<void>;
}

export interface Runtime extends Services {
  log: Logger;
  /** The parts in the order they were opened; they close in the reverse order. */
  components: readonly Component[];
  /** Closes every part, newest first; a second call waits for the first. */
  close(): Promise<void>;
}

export interface RuntimeOptions {
  /** The service log; a silent one by default. */
  log?: Logger;
  /** Where webhook secrets are read from (alerts.webhooks[].secret_env). */
  env?: NodeJS.ProcessEnv;
  /** The nightly job's clock. */
  clock?: () => Date;
  /** Load the models directory (default true); false serves none (the OpenAPI document, `plumbline drift`). */
  models?: boolean;
  /**
   * A serving process (default false): WAL checkpoints on a thread, commits on the writer thread
   * when log.writer is "thread", drift reports on worker threads, and the timers below.
   */
  serve?: boolean;
  /** Alert evaluation and delivery timers, the nightly reports and retention (default: as `serve`). */
  timers?: boolean;
}

/** The store's settings as the configuration gives them. */
export function storeOptions(config: Config, serve: boolean): StoreOptions {
  return {
    sync: config.log.sync,
    flushMs: config.log.flush_ms,
    flushRows: config.log.flush_rows,
    queueRows: config.log.queue_rows,
    rejectedRows: config.log.rejected_rows,
    walMaxBytes: config.log.wal_max_bytes,
    backgroundCheckpoints: serve,
    writerThread: serve && config.log.writer === 'thread',
  };
}

/** What the audit log keeps of a bundle: enough to decode its rows, and the file for drift reports. */
export function modelRecord(e: ModelEntry): ModelRecord {
  const b = e.bundle.file;
  return { sha256: b.sha256, name: b.name, version: b.version, features: b.features, classes: b.classes, bundle: serializeBundle(b) };
}

/** A registry that serves no models. */
function emptyRegistry(): ModelRegistry {
  return { dir: '', get: () => undefined, list: () => [], reload: async () => [] };
}

function latestMaxPsi(reportJson: string | null): number | null {
  if (!reportJson) return null;
  return maxPsi(JSON.parse(reportJson) as DriftReport);
}

function maxPsi(report: DriftReport): number | null {
  const psis = report.features.map((f) => f.psi).filter((p): p is number => p !== null);
  return psis.length > 0 ? Math.max(...psis) : null;
}

const once = (close: () => void | Promise<void>): (() => Promise<void>) => {
  let closing: Promise<void> | null = null;
  return () => (closing ??= Promise.resolve().then(close));
};

/**
 * Opens the service's parts in dependency order (store, registry, metrics, scoring,
 * explanations, reports, alerting, jobs) and hands them back with a close that undoes them in reverse. The server, the
 * tests, the OpenAPI generator and the CLI all start the service here. If a part fails to open,
 * those already open are closed before the error is thrown.
 */
export async function openRuntime(config: Config, options: RuntimeOptions = {}): Promise<Runtime> {
  const log = options.log ?? pino({ level: 'silent' });
  const serve = options.serve ?? false;
  const timers = options.timers ?? serve;
  const components: Component[] = [];
  const add = (name: ComponentName, dependsOn: readonly ComponentName[], value: unknown, close: () => void | Promise<void> = () => undefined): void => {
    components.push({ name, dependsOn, value, close: once(close) });
  };
  const closeAll = once(async () => {
    for (const c of [...components].reverse()) await c.close();
  });

  try {
    // The serving process holds the database (one server per file) and keeps the chain head beside it.
    const db = maskUrl(config.db);
    const store = await openStoreAt(config.db, {
      ...storeOptions(config, serve),
      ...(serve ? { serve: { version: VERSION, onFenced: (reason: string) => log.error({ db }, reason) } } : {}),
      server: {
        poolSize: config.postgres.pool_size,
        statementTimeoutMs: config.postgres.statement_timeout_ms,
        connectTimeoutMs: config.postgres.connect_timeout_ms,
        onPoolError: (message) => log.warn({ db }, `a connection to the database was lost: ${message}`),
      },
    });
    add('store', [], store, () => store.close());

    // A server answers recordModel later: the first load waits for it (a scored row names its
    // model's record), a reload (SIGHUP) logs what failed.
    let recording: Array<Promise<void>> | null = [];
    const record = (e: ModelEntry): void => {
      const done = store.recordModel(modelRecord(e));
      if (!(done instanceof Promise)) return;
      // At start a failure stops the start, as it does on SQLite; on a reload it is logged.
      if (recording) recording.push(done);
      else done.catch((err: unknown) => log.error({ model: e.bundle.file.name, err: (err as Error).message }, 'the model could not be recorded in the database'));
    };
    const registry = options.models === false ? emptyRegistry() : await createModelRegistry(config.models_dir, record, { maxBytes: config.limits.bundle_bytes });
    await Promise.all(recording);
    recording = null;
    add('registry', ['store'], registry);
    if (serve) {
      const kernel = kernelStatus();
      if (kernel.kind === 'webassembly-simd') log.info({ kernel: kernel.kind }, 'dense layers and triangular solves run on the WebAssembly SIMD kernel');
      else log.warn({ kernel: kernel.kind, reason: kernel.reason }, 'dense layers and triangular solves run in JavaScript: the same answers, slower');
    }

    const metrics = createMetrics();
    // The gauges start from what the log already holds.
    for (const e of registry.list()) {
      const psi = latestMaxPsi(await store.alerts.latestReport(e.name));
      if (psi !== null) metrics.driftMaxPsi.set({ model: e.name }, psi);
    }
    add('metrics', ['registry', 'store'], metrics);

    const scoring = createScoringService(
      registry,
      store.log,
      {
        scored(model, answers, latencyMs) {
          for (const a of answers) metrics.countScored(model, a.label, a.inDomain);
          metrics.scoreLatency.observe({ model }, latencyMs / 1000);
        },
        unlogged(model, answers, err) {
          metrics.unlogged.inc({ model }, answers);
          log.error({ model, answers, err: err.message }, 'answers served without their audit rows (log.on_error is "serve")');
        },
      },
      { onLogError: config.log.on_error },
    );
    add('scoring', ['registry', 'store', 'metrics'], scoring);

    const explanations = createExplanationService(registry, { getRequest: (id) => store.getRequest(id), bundleText: (name, sha256) => store.drift.bundleText(name, sha256) });
    add('explanations', ['registry', 'store'], explanations);

    const reports = createReportService(store, { minRows: config.reports.min_rows, sampleCap: config.reports.sample_cap, seed: 1, worker: serve }, (report) => {
      const psi = maxPsi(report);
      if (psi !== null) metrics.driftMaxPsi.set({ model: report.model.name }, psi);
    });
    add('reports', ['store', 'metrics'], reports);

    // Webhook secrets are resolved here, so that a missing one stops the start.
    const alerting = startAlerting({ config, registry, store, metrics, log, env: options.env ?? {}, timers });
    add('alerting', ['store', 'registry', 'metrics'], alerting, () => alerting.stop());

    let nightly: NightlyReports | null = null;
    let retention: RetentionJob | null = null;
    if (timers) {
      if (config.reports.schedule !== 'off') {
        nightly = startNightlyReports({
          registry,
          reports,
          drift: store.drift,
          schedule: config.reports.schedule,
          timezone: config.reports.timezone,
          log,
          exclusively: (name, work) => store.coordination.exclusively(name, work),
          ...(options.clock ? { now: options.clock } : {}),
        });
      }
      if (config.retention_days > 0) retention = startRetention({ retention: store.retention, days: config.retention_days, timezone: config.reports.timezone, log, exclusively: (name, work) => store.coordination.exclusively(name, work) });
    }
    add('jobs', ['registry', 'reports', 'store'], null, async () => {
      await nightly?.stop();
      await retention?.stop();
    });

    return { config, log, store, registry, metrics, scoring, explanations, reports, alerting, components, close: closeAll };
  } catch (err) {
    await closeAll();
    throw err;
  }
}
