import { once } from 'node:events';
import { connect } from 'node:net';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { configSchema } from '../../src/config/config.js';
import { type RunningServer, startServer } from '../../src/http/server.js';
import { tempDir } from '../helpers/datasets.js';

const tmp = tempDir();
let server: RunningServer;
beforeAll(async () => {
  server = await startServer(configSchema.parse({ port: 0, models_dir: new URL('../../demo-data/models', import.meta.url).pathname, db: join(tmp.dir, 'raw.db'), logger: { level: 'silent' }, reports: { schedule: 'off' }, log: { writer: 'thread' } }));
});
afterAll(async () => {
  await server.close();
  tmp.remove();
});

/** Sends bytes on a fresh connection and returns everything the server writes back. */
async function raw(bytes: string): Promise<string> {
  const { port } = new URL(server.url);
  const socket = connect(Number(port), '127.0.0.1');
  await once(socket, 'connect');
  let text = '';
  socket.on('data', (c: Buffer) => (text += c.toString()));
  socket.end(bytes);
  await once(socket, 'close');
  return text;
}

describe('requests that are not well-formed HTTP', () => {
  it('headers larger than Node accepts get 431 problem+json', async () => {
    const answer = await raw(`GET /healthz HTTP/1.1\r\nHost: x\r\nX-Big: ${'a'.repeat(40_000)}\r\n\r\n`);
    expect(answer).toMatch(/^HTTP\/1\.1 431 /);
    expect(answer).toMatch(/content-type: application\/problem\+json/i);
    expect(answer).toContain('urn:plumbline:problem:headers-too-large');
  });

  it('a request line that is not HTTP gets 400 problem+json', async () => {
    const answer = await raw('HELLO there\r\n\r\n');
    expect(answer).toMatch(/^HTTP\/1\.1 400 /);
    expect(answer).toContain('urn:plumbline:problem:invalid-request');
  });

  it('a URL that cannot be decoded and an overlong path segment get problem+json', async () => {
    const bad = await fetch(`${server.url}/v1/models/%zz`);
    expect(bad.status).toBe(400);
    expect(bad.headers.get('content-type')).toMatch(/^application\/problem\+json/);
    const long = await fetch(`${server.url}/v1/models/${'m'.repeat(300)}/score`, { method: 'POST', headers: { 'content-type': 'application/json' }, body: '{}' });
    expect(long.status).toBe(404);
    expect(((await long.json()) as { type: string }).type).toBe('urn:plumbline:problem:not-found');
  });

  it('a transfer coding other than chunked is refused with 400, naming the header, and nothing is scored; chunked alone is scored', async () => {
    const body = JSON.stringify({ features: [232.1, 53.8, 923, 478, 3.48, 14.18, 102, 5.4, 23.7, 47.93] });
    // Written without ending our side: the answer may wait for the writer thread to start.
    const send = async (te: string): Promise<string> => {
      const socket = connect(Number(new URL(server.url).port), '127.0.0.1');
      await once(socket, 'connect');
      let text = '';
      socket.on('data', (c: Buffer) => (text += c.toString()));
      socket.write(`POST /v1/models/moulding-quality/score HTTP/1.1\r\nHost: x\r\nConnection: close\r\nContent-Type: application/json\r\nTransfer-Encoding: ${te}\r\n\r\n${body.length.toString(16)}\r\n${body}\r\n0\r\n\r\n`);
      await once(socket, 'close');
      return text;
    };
    const before = server.runtime.store.log.stats().committedRows;
    // a plain body announced as gzip then chunked: it would have been scored as if plain (RFC 9112, section 6.1)
    const gzip = await send('gzip, chunked');
    expect(gzip).toMatch(/^HTTP\/1\.1 400 /);
    const problem = JSON.parse(gzip.slice(gzip.indexOf('\r\n\r\n') + 4)) as { type: string; errors: unknown[] };
    expect(problem.type).toBe('urn:plumbline:problem:invalid-request');
    expect(problem.errors).toEqual([{ header: 'transfer-encoding', detail: 'must be absent or chunked' }]);
    expect(server.runtime.store.log.stats().committedRows).toBe(before);
    expect(await send('chunked')).toMatch(/^HTTP\/1\.1 200 /);
  });

  it('keeps serving afterwards', async () => {
    expect((await fetch(`${server.url}/healthz`)).status).toBe(200);
  });

  it('commits scored rows on its writer thread (log.writer "thread"), and answers after they are in the log', async () => {
    const res = await fetch(`${server.url}/v1/models/moulding-quality/score`, {
      method: 'POST',
      headers: { 'content-type': 'application/json' },
      body: JSON.stringify({ features: [232.1, 53.8, 923, 478, 3.48, 14.18, 102, 5.4, 23.7, 47.93] }),
    });
    expect(res.status).toBe(200);
    const { request_id } = (await res.json()) as { request_id: string };
    expect(server.app.store.log.stats()).toMatchObject({ writer: 'thread', failedRows: 0 });
    expect((await server.app.store.queryRequests({}, 10)).items.map((r) => r.request_id)).toContain(request_id);
  });
});
