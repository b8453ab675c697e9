import { readFileSync } from 'node:fs';
import { createSecureContext } from 'node:tls';
import type { FastifyInstance } from 'fastify';
import { checkExposure } from '../auth/exposure.js';
import { type Logger, pino } from 'pino';
import { type ModelEntry, createModelRegistry } from '../bundle/registry.js';
import type { Config } from '../config.js';
import { serializeBundle } from '../bundle/write.js';
import { type Alerting, startAlerting } from '../alerts/runtime.js';
import { startNightlyReports } from '../jobs/nightly-reports.js';
import { type RetentionJob, startRetention } from '../jobs/retention.js';
import { ConfigError } from '../config.js';
import { createServices } from '../services.js';
import type { ModelRecord } from '../store/models-table.js';
import { type Store, openStore } from '../store/store.js';
import { VERSION } from '../version.js';
import { buildApp } from './app.js';

declare module 'fastify' {
  interface FastifyInstance {
    /** The alert rules and webhook deliveries of a running server. */
    alerting?: Alerting;
  }
}

export interface RunningServer {
  app: FastifyInstance;
  store: Store;
  /** The address it listens on, e.g. http://127.0.0.1:8080. */
  url: string;
  /** Stops accepting, finishes in-flight requests, commits the log and closes the database. */
  close(): Promise<void>;
}

/** Milliseconds a shutdown may take before the process gives up waiting for in-flight requests. */
const SHUTDOWN_GRACE_MS = 10_000;

function readTls(certFile: string, keyFile: string): { cert: Buffer; key: Buffer } {
  const read = (key: string, file: string): Buffer => {
    try {
      return readFileSync(file);
    } catch (err) {
      throw new ConfigError([`${key} = ${JSON.stringify(file)}: cannot be read (${(err as NodeJS.ErrnoException).code ?? (err as Error).message})`]);
    }
  };
  const pair = { cert: read('tls.cert', certFile), key: read('tls.key', keyFile) };
  try {
    createSecureContext(pair);
  } catch (err) {
    throw new ConfigError([`tls.cert and tls.key (${certFile}, ${keyFile}) are not a PEM certificate chain and its private key: ${(err as Error).message}`]);
  }
  return pair;
}

/** What the audit log keeps of a bundle: enough to decode its rows, and the file for drift reports. */
export function modelRecord(e: ModelEntry): ModelRecord {
  const b = e.bundle.file;
  return { sha256: b.sha256, name: b.name, version: b.version, features: b.features, classes: b.classes, bundle: serializeBundle(b) };
}

/**
 * Opens the audit log, loads the models, builds the app and listens. With `handleSignals`,
 * SIGTERM and SIGINT shut down gracefully and SIGHUP reloads the models directory.
 */
export async function startServer(
  config: Config,
  options: { logger?: Logger; handleSignals?: boolean; warnings?: string[]; env?: NodeJS.ProcessEnv; alertTimers?: boolean; beforeListen?: (app: FastifyInstance) => void } = {},
): Promise<RunningServer> {
  const log = options.logger ?? pino({ level: config.logger.level });
  for (const w of options.warnings ?? []) log.warn(w);
  const store = openStore(config.db, {
    sync: config.log.sync,
    flushMs: config.log.flush_ms,
    flushRows: config.log.flush_rows,
    queueRows: config.log.queue_rows,
    rejectedRows: config.log.rejected_rows,
    walMaxBytes: config.log.wal_max_bytes,
    backgroundCheckpoints: true,
    writerThread: config.log.writer === "thread",
    serve: { version: VERSION, onFenced: (reason) => log.error({ db: config.db }, reason) },
  });
  let app: FastifyInstance | null = null;
  let alerting: Alerting | null = null;
  let retention: RetentionJob | null = null;
  try {
    const keys = store.keys.list();
    const exposure = checkExposure({ host: config.host, auth: config.auth, keys: keys.length, liveKeys: keys.filter((k) => k.revoked_at === null).length });
    if (exposure) log.warn(exposure);
    const https = config.tls.cert !== undefined && config.tls.key !== undefined ? readTls(config.tls.cert, config.tls.key) : undefined;
    const registry = await createModelRegistry(config.models_dir, (e) => store.recordModel(modelRecord(e)), { maxBytes: config.limits.bundle_bytes });
    if (registry.list().length === 0) log.warn({ dir: config.models_dir }, 'no *.bundle.json in the models directory; scoring answers 404 until one is added and SIGHUP sent');
    const services = createServices(config, registry, store, { log });
    // Webhook secrets are resolved before listening, so that a missing one stops the start.
    alerting = startAlerting({ config, registry, store, metrics: services.metrics, log, env: options.env ?? {}, timers: options.alertTimers ?? true });
    app = await buildApp(services, { logger: log, version: VERSION, ...(https ? { https } : {}) });
    app.decorate('alerting', alerting);
    // A benchmark adds its reference route here, in the same fastify, before anything is ready.
    options.beforeListen?.(app);
    await app.listen({ host: config.host, port: config.port });
    log.info({ models: registry.list().map((e) => `${e.name}@${e.bundle.file.version}`), db: config.db, sync: config.log.sync }, 'serving');

    const nightly =
      config.reports.schedule === 'off'
        ? null
        : startNightlyReports({ registry, reports: services.reports, drift: store.drift, schedule: config.reports.schedule, timezone: config.reports.timezone, log });
    retention = config.retention_days > 0 ? startRetention({ retention: store.retention, days: config.retention_days, timezone: config.reports.timezone, log }) : null;
    const pruning = retention;

    const running = app;
    let closing: Promise<void> | null = null;
    const close = (): Promise<void> =>
      (closing ??= (async () => {
        await running.close();
        await nightly?.stop();
        await pruning?.stop();
        await alerting?.stop();
        store.close();
      })());

    if (options.handleSignals) {
      const shutdown = (signal: string): void => {
        log.info({ signal }, 'shutting down: finishing in-flight requests');
        const force = setTimeout(() => {
          log.error({ after_ms: SHUTDOWN_GRACE_MS }, 'shutdown timed out; exiting');
          process.exit(1);
        }, SHUTDOWN_GRACE_MS);
        force.unref();
        close().then(
          () => {
            log.info('audit log committed and closed; bye');
            process.exitCode = 0;
          },
          (err: unknown) => {
            log.error({ err }, 'shutdown failed');
            process.exitCode = 1;
          },
        );
      };
      process.once('SIGTERM', () => shutdown('SIGTERM'));
      process.once('SIGINT', () => shutdown('SIGINT'));
      process.on('SIGHUP', () => {
        registry.reload().then(
          (entries) => log.info({ models: entries.map((e) => `${e.name}@${e.bundle.file.version}`) }, 'models reloaded'),
          (err: unknown) => log.error({ err: (err as Error).message }, 'reload refused; the models loaded before are still served'),
        );
      });
    }
    const address = app.server.address();
    const url = typeof address === 'object' && address ? `${https ? 'https' : 'http'}://${address.family === 'IPv6' ? `[${address.address}]` : address.address}:${address.port}` : String(address);
    return { app, store, url, close };
  } catch (err) {
    await alerting?.stop();
    await retention?.stop();
    await app?.close().catch(() => undefined);
    store.close();
    throw err;
  }
}
