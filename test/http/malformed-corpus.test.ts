import { once } from 'node:events';
import { connect } from 'node:net';
import { fileURLToPath } from 'node:url';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { configSchema } from '../../src/config/config.js';
import { type RunningServer, startServer } from '../../src/http/server.js';
import { MALFORMED } from '../fixtures/malformed-corpus.js';
import { tempDir } from '../helpers/datasets.js';
import { capturedLogger } from '../helpers/sink.js';

const tmp = tempDir();
let server: RunningServer;
const logged = capturedLogger('error');
beforeAll(async () => {
  const config = configSchema.parse({ port: 0, models_dir: fileURLToPath(new URL('../../demo-data/models', import.meta.url)), db: tmp.file('corpus.db'), reports: { schedule: 'off' }, retention_days: 0 });
  server = await startServer(config, { logger: logged.logger });
});
afterAll(async () => {
  await server.close();
  tmp.remove();
});

/** Sends the bytes on a fresh connection and reads the answer until the server closes it. */
async function send(bytes: Buffer): Promise<{ status: number; contentType: string; body: string; raw: string }> {
  const { port } = new URL(server.url);
  const socket = connect(Number(port), '127.0.0.1');
  await once(socket, 'connect');
  const chunks: Buffer[] = [];
  socket.on('data', (c: Buffer) => chunks.push(c));
  socket.on('error', () => undefined);
  socket.end(bytes);
  await once(socket, 'close');
  const raw = Buffer.concat(chunks).toString('utf8');
  const [head = '', body = ''] = raw.split('\r\n\r\n', 2);
  const status = Number(/^HTTP\/1\.1 (\d{3})/.exec(head)?.[1] ?? 0);
  const contentType = /^content-type: *(.+)$/im.exec(head)?.[1]?.trim() ?? '';
  return { status, contentType, body, raw };
}

describe(`a corpus of ${MALFORMED.length} malformed requests`, () => {
  it('holds at least 100 requests, each named once', () => {
    expect(MALFORMED.length).toBeGreaterThanOrEqual(100);
    expect(new Set(MALFORMED.map((m) => m.name)).size).toBe(MALFORMED.length);
  });

  it('gets a 4xx problem+json answer for every one, never a 5xx', async () => {
    const wrong: string[] = [];
    for (const m of MALFORMED) {
      const a = await send(m.bytes);
      const problem = a.contentType.startsWith('application/problem+json') && /"type":"urn:plumbline:problem:[a-z-]+"/.test(a.body);
      if (!(a.status >= 400 && a.status < 500) || !problem) wrong.push(`${m.name}: ${a.raw.slice(0, 160).replace(/\r\n/g, ' | ')}`);
    }
    expect(wrong).toEqual([]);
  }, 60_000);

  it('logged no failure of its own while answering them', () => {
    expect(logged.lines.filter((l) => /request failed/.test(l))).toEqual([]);
  });

  it('keeps serving: health, and a good request scored and logged', async () => {
    expect((await fetch(`${server.url}/healthz`)).status).toBe(200);
    const res = await fetch(`${server.url}/v1/models/moulding-quality/score`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify({ features: [232.1, 53.8, 923, 478, 3.48, 14.18, 102, 5.4, 23.7, 47.93] }) });
    expect(res.status).toBe(200);
    const { request_id } = (await res.json()) as { request_id: string };
    const logged = (await (await fetch(`${server.url}/v1/requests?limit=1`)).json()) as { items: Array<{ request_id: string }> };
    expect(logged.items[0]?.request_id).toBe(request_id);
    // and nothing of the malformed ones was scored
    const all = (await (await fetch(`${server.url}/v1/requests?limit=500`)).json()) as { items: unknown[] };
    expect(all.items).toHaveLength(1);
  });
});
