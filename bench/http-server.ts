// The service in a process of its own for the HTTP benchmarks, with one extra route in the same
// fastify: POST /bench/bare, which answers with the bytes of a real score answer and does nothing
// else. Prints {"url": ..., "bytes": n} once it listens. Loopback only.
// The service is the compiled one under dist/, as `npm start` serves it: startChild builds it
// first (bench/lib/build.ts).
//   tsx bench/http-server.ts MODELS_DIR DB_FILE MODEL VECTOR_JSON [CONFIG_JSON]
import { pathToFileURL } from 'node:url';
import { pino } from 'pino';
import { distModule } from './lib/build.js';

const load = async <T>(path: string): Promise<T> => (await import(pathToFileURL(distModule(path)).href)) as T;
const { configSchema } = await load<typeof import('../src/config/config.js')>('config/config.js');
const { startServer } = await load<typeof import('../src/http/server.js')>('http/server.js');

const [modelsDir, db, model, vectorJson, configJson] = process.argv.slice(2);
if (!modelsDir || !db || !model || !vectorJson) throw new Error('usage: http-server.ts MODELS_DIR DB_FILE MODEL VECTOR_JSON [CONFIG_JSON]');
const config = configSchema.parse({
  host: '127.0.0.1',
  port: 0,
  models_dir: modelsDir,
  db,
  reports: { schedule: 'off' },
  retention_days: 0,
  logger: { level: 'warn' },
  ...(JSON.parse(configJson ?? '{}') as Record<string, unknown>),
});
let bare: Buffer = Buffer.from('{}');
const server = await startServer(config, {
  logger: pino({ level: 'error' }, process.stderr),
  beforeListen: (app) => {
    app.post('/bench/bare', { config: { access: 'scorer' } }, async (_req, reply) => reply.type('application/json; charset=utf-8').send(bare));
    // The answer's bytes, for the bare fastify app of bench/bare-fastify.ts to send too.
    app.get('/bench/answer', { config: { access: 'public' } }, async (_req, reply) => reply.type('application/json; charset=utf-8').send(bare));
  },
});
// The same bytes the score route sends, taken from a real answer.
const answer = await server.app.inject({ method: 'POST', url: `/v1/models/${model}/score`, payload: { features: JSON.parse(vectorJson) } });
if (answer.statusCode !== 200) throw new Error(`the score route answered ${answer.statusCode}: ${answer.body}`);
bare = answer.rawPayload;
process.stdout.write(`${JSON.stringify({ url: server.url, bytes: bare.length })}\n`);
// Exit cleanly on SIGTERM, so that --cpu-prof (when given) writes its profile.
process.once('SIGTERM', () => void server.close().then(() => process.exit(0)));
