import type { Command } from 'commander';
import { loadConfig, processEnv } from '../../config/config.js';
import { startServer } from '../../http/server.js';
import { asListenError } from '../listen-error.js';
import { integerIn, oneOf } from '../options.js';

interface ServeFlags {
  config?: string;
  host?: string;
  port?: number;
  models?: string;
  db?: string;
  auth?: 'keys' | 'off';
}

export function registerServe(program: Command): void {
  program
    .command('serve')
    .description('serve the bundles of a directory over HTTP, logging every answer to SQLite')
    .option('--config <file.json>', 'configuration file; PLUMBLINE_* environment variables override it, flags override both')
    .option('--host <host>', 'address to listen on (default 127.0.0.1)')
    .option('--port <port>', 'port to listen on (default 8080; 0 picks a free one)', integerIn(0, 65535))
    .option('--models <dir>', 'directory of *.bundle.json files (default models)')
    .option('--db <file>', 'SQLite file of the audit log, created when missing (default var/plumbline.db)')
    .option('--auth <mode>', '"keys": once a key exists every /v1 route needs one, and with none only loopback is served; "off": no keys asked for on any address (default keys)', oneOf(['keys', 'off'] as const))
    .action(async (flags: ServeFlags) => {
      const { config, warnings } = loadConfig({
        ...(flags.config !== undefined ? { file: flags.config } : {}),
        env: processEnv(),
        flags: { host: flags.host, port: flags.port, models_dir: flags.models, db: flags.db, auth: flags.auth },
      });
      try {
        await startServer(config, { handleSignals: true, warnings, env: processEnv() });
      } catch (err) {
        throw asListenError(err, config.host, config.port);
      }
    });
}
