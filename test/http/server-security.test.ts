import { spawnSync } from 'node:child_process';
import { readFileSync } from 'node:fs';
import { get } from 'node:https';
import { fileURLToPath } from 'node:url';
import { afterAll, describe, expect, it } from 'vitest';
import { ExposureError, checkExposure, isLoopback } from '../../src/auth/exposure.js';
import { ConfigError, configSchema } from '../../src/config/config.js';
import { startServer } from '../../src/http/server.js';
import { tempDir } from '../helpers/datasets.js';
import { capturedLogger } from '../helpers/sink.js';

const tmp = tempDir();
afterAll(() => tmp.remove());
const MODELS = fileURLToPath(new URL('../../demo-data/models', import.meta.url));
const CERT = fileURLToPath(new URL('../fixtures/tls/test-cert.pem', import.meta.url));
const KEY = fileURLToPath(new URL('../fixtures/tls/test-key.pem', import.meta.url));
const config = (o: Record<string, unknown>) => configSchema.parse({ port: 0, models_dir: MODELS, db: tmp.file(`${Math.random().toString(36).slice(2)}.db`), reports: { schedule: 'off' }, retention_days: 0, ...o });

describe('who may reach a service without keys', () => {
  it('knows the loopback addresses', () => {
    for (const h of ['127.0.0.1', '127.9.9.9', '::1', '[::1]', 'localhost', 'LOCALHOST']) expect(isLoopback(h), h).toBe(true);
    for (const h of ['0.0.0.0', '::', '10.0.0.5', '192.168.1.20', 'press-4.plant.example', '128.0.0.1']) expect(isLoopback(h), h).toBe(false);
  });

  it('serves loopback without keys, with a warning; refuses any other address unless auth is off', () => {
    expect(checkExposure({ host: '127.0.0.1', auth: 'keys', keys: 0, liveKeys: 0 })).toMatch(/^no API keys exist/);
    expect(() => checkExposure({ host: '0.0.0.0', auth: 'keys', keys: 0, liveKeys: 0 })).toThrow(ExposureError);
    expect(checkExposure({ host: '0.0.0.0', auth: 'keys', keys: 1, liveKeys: 1 })).toBeNull();
    expect(checkExposure({ host: '0.0.0.0', auth: 'off', keys: 0, liveKeys: 0 })).toMatch(/^auth is off: anyone who can reach 0.0.0.0/);
    expect(checkExposure({ host: '127.0.0.1', auth: 'off', keys: 0, liveKeys: 0 })).toBeNull();
    // every key revoked: nothing is let in, and the start says so
    expect(checkExposure({ host: '0.0.0.0', auth: 'keys', keys: 2, liveKeys: 0 })).toMatch(/^every API key is revoked, so every \/v1 request is refused with 401/);
  });

  it('does not start on 0.0.0.0 without keys, and logs the warning on loopback', async () => {
    await expect(startServer(config({ host: '0.0.0.0' }), { logger: capturedLogger().logger })).rejects.toThrow(/refusing to listen on 0.0.0.0 with no API keys/);
    const { logger, lines } = capturedLogger();
    const server = await startServer(config({ host: '127.0.0.1' }), { logger });
    await server.close();
    expect(lines.some((l) => JSON.parse(l).level === 40 && /no API keys exist/.test(JSON.parse(l).msg))).toBe(true);
    // and which kernel the forward pass runs on
    expect(lines.map((l) => JSON.parse(l) as { kernel?: string }).find((l) => l.kernel !== undefined)?.kernel).toBe('webassembly-simd');
  });

  it('plumbline serve --host 0.0.0.0 exits 2 and says how to go on', () => {
    const run = spawnSync(process.execPath, ['--import', 'tsx', fileURLToPath(new URL('../../src/cli/main.ts', import.meta.url)), 'serve', '--host', '0.0.0.0', '--port', '0', '--models', MODELS, '--db', tmp.file('cli.db')], {
      encoding: 'utf8',
      env: { ...process.env, PLUMBLINE_REPORTS_SCHEDULE: 'off' },
    });
    expect(run.status).toBe(2);
    expect(run.stderr).toMatch(/refusing to listen on 0.0.0.0 with no API keys.*plumbline keys create.*--auth off/s);
  });
});

describe('TLS', () => {
  it('serves HTTPS with tls.cert and tls.key', async () => {
    const server = await startServer(config({ host: '127.0.0.1', tls: { cert: CERT, key: KEY } }), { logger: capturedLogger().logger });
    try {
      expect(server.url).toMatch(/^https:\/\/127\.0\.0\.1:\d+$/);
      const body = await new Promise<{ status: number; text: string }>((resolve, reject) => {
        get(`${server.url}/healthz`, { ca: readFileSync(CERT) }, (res) => {
          let text = '';
          res.on('data', (c: Buffer) => (text += c.toString()));
          res.on('end', () => resolve({ status: res.statusCode ?? 0, text }));
        }).on('error', reject);
      });
      expect(body.status).toBe(200);
      expect(JSON.parse(body.text).status).toBe('ok');
      // plain HTTP to the same port gets no answer it can read as HTTP
      await expect(fetch(server.url.replace('https:', 'http:') + '/healthz')).rejects.toThrow();
    } finally {
      await server.close();
    }
  });

  it('refuses a missing or wrong certificate file with the key named', async () => {
    await expect(startServer(config({ tls: { cert: tmp.file('none.pem'), key: KEY } }))).rejects.toThrow(ConfigError);
    await expect(startServer(config({ tls: { cert: tmp.file('none.pem'), key: KEY } }))).rejects.toThrow(/tls\.cert = ".*none\.pem": cannot be read \(ENOENT\)/);
    await expect(startServer(config({ tls: { cert: KEY, key: CERT } }))).rejects.toThrow(/are not a PEM certificate chain and its private key/);
    expect(() => configSchema.parse({ tls: { cert: CERT } })).toThrow(/give both tls.cert and tls.key/);
  });
});
