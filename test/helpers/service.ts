import { mkdirSync } from 'node:fs';
import { join } from 'node:path';
import BetterSqlite3, { type Database } from 'better-sqlite3';
import type { FastifyInstance } from 'fastify';
import type { Logger } from 'pino';
import type { ModelRegistry } from '../../src/bundle/registry.js';
import type { AnyBundleFile, BundleFile } from '../../src/bundle/schema.js';
import { writeBundle } from '../../src/bundle/write.js';
import { type Config, configSchema } from '../../src/config/config.js';
import { buildApp } from '../../src/http/app.js';
import { openRuntime } from '../../src/runtime.js';
import type { SqliteStore } from '../../src/store/store.js';
import { irisBundle } from './bundles.js';
import { tempDir } from './datasets.js';

let cachedIris: BundleFile | null = null;
/** One trained Iris bundle per test file (training takes a fraction of a second). */
export function iris(): BundleFile {
  cachedIris ??= irisBundle().bundle;
  return cachedIris;
}

export interface TestService {
  app: FastifyInstance;
  store: SqliteStore;
  registry: ModelRegistry;
  config: Config;
  modelsDir: string;
  dbFile: string;
  /** A second, read-only connection, to check what was committed. */
  db: Database;
  rows(sql?: string): Array<Record<string, unknown>>;
  close(): Promise<void>;
}

/** The app over a fresh temporary database and models directory (CONVENTIONS 10). */
export async function startTestService(options: { bundles?: AnyBundleFile[]; config?: Record<string, unknown>; logger?: Logger; dbFile?: string } = {}): Promise<TestService> {
  const tmp = tempDir('plumbline-svc-');
  const modelsDir = join(tmp.dir, 'models');
  mkdirSync(modelsDir);
  for (const b of options.bundles ?? [iris()]) await writeBundle(join(modelsDir, `${b.name}.bundle.json`), b);
  const dbFile = options.dbFile ?? join(tmp.dir, 'audit.db');
  // No load shedding unless a test asks for it: the app shares its event loop with the test's own
  // work (training, replaying a day), which on a loaded machine lags it past the service's limit.
  const limits = { event_loop_delay_ms: 0, ...(options.config?.limits as Record<string, unknown> | undefined) };
  const config = configSchema.parse({ models_dir: modelsDir, db: dbFile, ...options.config, limits });
  const runtime = await openRuntime(config, options.logger ? { log: options.logger } : {});
  const { registry } = runtime;
  // A file path: the SQLite store, whose parts answer synchronously.
  const store = runtime.store as SqliteStore;
  const app = await buildApp(runtime, options.logger ? { logger: options.logger } : {});
  await app.ready();
  const db = new BetterSqlite3(dbFile, { readonly: true });
  return {
    app,
    store,
    registry,
    config,
    modelsDir,
    dbFile,
    db,
    rows: (sql = 'SELECT * FROM scored_requests ORDER BY seq') => db.prepare(sql).all() as Array<Record<string, unknown>>,
    async close() {
      // Closing the app closes the runtime it was built over, the store last.
      await app.close();
      db.close();
      tmp.remove();
    },
  };
}

export const SETOSA = { sepal_length: 5.1, sepal_width: 3.5, petal_length: 1.4, petal_width: 0.2 };
export const VIRGINICA = { sepal_length: 6.7, sepal_width: 3.0, petal_length: 5.2, petal_width: 2.3 };
