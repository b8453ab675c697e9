import { readFileSync } from 'node:fs';
import { createSecureContext } from 'node:tls';
import type { FastifyInstance } from 'fastify';
import { maskUrl } from '../store/location.js';
import { type Logger, pino } from 'pino';
import { checkExposure } from '../auth/exposure.js';
import { type Config, ConfigError } from '../config/config.js';
import { type Runtime, openRuntime } from '../runtime.js';
import { VERSION } from '../version.js';
import { buildApp } from './app.js';

export interface RunningServer {
  app: FastifyInstance;
  runtime: Runtime;
  /** The address it listens on, e.g. http://127.0.0.1:8080. */
  url: string;
  /** Stops accepting, finishes in-flight requests, then closes the runtime (the audit log last). */
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

export interface ServerOptions {
  logger?: Logger;
  /** SIGTERM and SIGINT shut down gracefully; SIGHUP reloads the models directory. */
  handleSignals?: boolean;
  /** Lines to log as warnings at start (from reading the configuration). */
  warnings?: string[];
  /** Where webhook secrets are read from. */
  env?: NodeJS.ProcessEnv;
  /** Alert, nightly-report and retention timers (default true). */
  timers?: boolean;
  /** The nightly job's clock. */
  clock?: () => Date;
  /** Called with the app before it listens (a benchmark adds its reference route here). */
  beforeListen?: (app: FastifyInstance) => void;
}

/** Opens the runtime, builds the app over it, and listens. */
export async function startServer(config: Config, options: ServerOptions = {}): Promise<RunningServer> {
  const log = options.logger ?? pino({ level: config.logger.level });
  for (const w of options.warnings ?? []) log.warn(w);
  const https = config.tls.cert !== undefined && config.tls.key !== undefined ? readTls(config.tls.cert, config.tls.key) : undefined;
  const runtime = await openRuntime(config, {
    log,
    env: options.env ?? {},
    serve: true,
    timers: options.timers ?? true,
    ...(options.clock ? { clock: options.clock } : {}),
  });
  let app: FastifyInstance | null = null;
  try {
    const keys = await runtime.store.keys.list();
    const exposure = checkExposure({ host: config.host, auth: config.auth, keys: keys.length, liveKeys: keys.filter((k) => k.revoked_at === null).length });
    if (exposure) log.warn(exposure);
    if (runtime.registry.list().length === 0) log.warn({ dir: config.models_dir }, 'no *.bundle.json in the models directory; scoring answers 404 until one is added and SIGHUP sent');
    app = await buildApp(runtime, { logger: log, version: VERSION, ...(https ? { https } : {}) });
    options.beforeListen?.(app);
    await app.listen({ host: config.host, port: config.port });
  } catch (err) {
    // The app, once built, owns the runtime: closing it closes the runtime's parts.
    await (app ? app.close() : runtime.close()).catch(() => undefined);
    throw err;
  }
  log.info({ models: runtime.registry.list().map((e) => `${e.name}@${e.bundle.file.version}`), db: maskUrl(config.db), sync: config.log.sync }, 'serving');

  const running = app;
  let closing: Promise<void> | null = null;
  const close = (): Promise<void> => (closing ??= running.close().then(() => runtime.close()));

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
      runtime.registry.reload().then(
        (entries) => log.info({ models: entries.map((e) => `${e.name}@${e.bundle.file.version}`) }, 'models reloaded'),
        (err: unknown) => log.error({ err: (err as Error).message }, 'reload refused; the models loaded before are still served'),
      );
    });
  }
  const address = app.server.address();
  const url = typeof address === 'object' && address ? `${https ? 'https' : 'http'}://${address.family === 'IPv6' ? `[${address.address}]` : address.address}:${address.port}` : String(address);
  return { app, runtime, url, close };
}
