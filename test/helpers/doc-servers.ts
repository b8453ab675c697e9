import { copyFileSync, mkdirSync } from 'node:fs';
import { join } from 'node:path';
import { pino } from 'pino';
import { createKeyAction, revokeKeyAction } from '../../src/cli/actions/keys.js';
import { configSchema } from '../../src/config/config.js';
import { type RunningServer, startServer } from '../../src/http/server.js';
import { tempDir } from './datasets.js';
import { sink } from './sink.js';

/** The address the docs write their examples with. */
export const DOC_URL = 'http://127.0.0.1:8080';

export interface DocServer {
  server: RunningServer;
  /** Environment the doc's commands read: SCORER_KEY, READER_KEY, ADMIN_KEY, OLD_READER_KEY when keyed. */
  env: Record<string, string>;
  dir: string;
  /** The command with the doc's address replaced by this server's. */
  command(cmd: string): string;
  close(): Promise<void>;
}

const quiet = () => ({ stdout: sink(), stderr: sink(), interactive: false });

/**
 * A real server (startServer, as `plumbline serve` runs it) on a fresh temporary database, serving
 * demo-data/models as the docs' examples do, or an empty directory, or a copy of it that a test may change.
 */
export async function startDocServer(options: { config?: Record<string, unknown>; keys?: boolean; models?: 'empty' | 'copy' } = {}): Promise<DocServer> {
  const tmp = tempDir('plumbline-doc-');
  const db = join(tmp.dir, 'docs.db');
  const env: Record<string, string> = {};
  if (options.keys) {
    env.ADMIN_KEY = (await createKeyAction({ db, role: 'admin', label: 'ops' }, quiet())).key;
    env.SCORER_KEY = (await createKeyAction({ db, role: 'scorer', label: 'line-3 app' }, quiet())).key;
    env.READER_KEY = (await createKeyAction({ db, role: 'reader', label: 'quality engineer' }, quiet())).key;
    const old = (await createKeyAction({ db, role: 'reader', label: 'old reader' }, quiet()));
    await revokeKeyAction({ db, id: old.id }, quiet());
    env.OLD_READER_KEY = old.key;
  }
  let models = options.models ?? 'demo-data/models';
  if (models === 'empty' || models === 'copy') {
    models = join(tmp.dir, 'models');
    mkdirSync(models);
    if (options.models === 'copy') copyFileSync(new URL('../../demo-data/models/moulding-quality.bundle.json', import.meta.url), join(models, 'moulding-quality.bundle.json'));
  }
  // No load shedding unless asked for: these servers share the test's event loop, which the
  // examples' own work (replaying the demo day, drift reports) lags on a loaded machine.
  const limits = { event_loop_delay_ms: 0, ...(options.config?.limits as Record<string, unknown> | undefined) };
  const config = configSchema.parse({ port: 0, models_dir: models, db, logger: { level: 'silent' }, reports: { schedule: 'off' }, ...options.config, limits });
  const server = await startServer(config, { logger: pino({ level: 'silent' }), timers: false });
  return {
    server,
    env,
    dir: tmp.dir,
    command: (cmd) => cmd.replaceAll(DOC_URL, server.url),
    async close() {
      await server.close();
      tmp.remove();
    },
  };
}
