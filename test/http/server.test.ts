import { once } from 'node:events';
import { mkdirSync, writeFileSync } from 'node:fs';
import { createServer } from 'node:http';
import { connect } from 'node:net';
import type { AddressInfo } from 'node:net';
import { join } from 'node:path';
import BetterSqlite3 from 'better-sqlite3';
import { afterAll, describe, expect, it } from 'vitest';
import { serializeBundle, writeBundle } from '../../src/bundle/write.js';
import { tempDir } from '../helpers/datasets.js';
import { SETOSA, iris } from '../helpers/service.js';
import { serve, waitFor } from '../helpers/serve-process.js';

const tmp = tempDir();
afterAll(() => tmp.remove());

const post = (url: string, body: unknown) => fetch(url, { method: 'POST', headers: { 'content-type': 'application/json' }, body: JSON.stringify(body) });

describe('plumbline serve (a real process)', () => {
  it('serves, keeps serving when SIGHUP finds a bad bundle, and on SIGTERM finishes in-flight work and commits the log', async () => {
    const models = join(tmp.dir, 'models-a');
    mkdirSync(models);
    await writeBundle(join(models, 'iris.bundle.json'), iris());
    const db = join(tmp.dir, 'a.db');
    const child = serve(['--models', models, '--db', db]);
    const base = await child.url;

    const first = await post(`${base}/v1/models/iris/score`, { features: SETOSA });
    expect(first.status).toBe(200);

    writeFileSync(join(models, 'bad.bundle.json'), serializeBundle(iris()).replace('"iris"', '"iris2"'));
    child.proc.kill('SIGHUP');
    await waitFor(() => child.lines().some((l) => l.msg === 'reload refused; the models loaded before are still served'));
    expect((await post(`${base}/v1/models/iris/score`, { features: SETOSA })).status).toBe(200);

    // On one raw connection: half a batch, then SIGTERM, then the rest of it and a second,
    // pipelined request. The batch is surely in flight and must be answered, with Connection:
    // close; the connection then ends, so the second request is never taken.
    const body = JSON.stringify({ items: new Array(500).fill({ features: SETOSA }) });
    const { port } = new URL(base);
    const socket = connect(Number(port), '127.0.0.1');
    await once(socket, 'connect');
    let raw = '';
    socket.on('data', (c: Buffer) => (raw += c.toString()));
    const head = `POST /v1/models/iris/score-batch HTTP/1.1\r\nHost: x\r\nContent-Type: application/json\r\nContent-Length: ${Buffer.byteLength(body)}\r\n\r\n`;
    socket.write(head + body.slice(0, 1000));
    await new Promise((r) => setTimeout(r, 150));
    child.proc.kill('SIGTERM');
    await waitFor(() => child.lines().some((l) => l.msg === 'shutting down: finishing in-flight requests'));
    socket.write(`${body.slice(1000)}GET /v1/models HTTP/1.1\r\nHost: x\r\n\r\n`);
    await once(socket, 'close');
    const answers = raw.split(/(?=HTTP\/1\.1 )/);
    expect(answers[0]).toMatch(/^HTTP\/1\.1 200 /);
    const answered = (JSON.parse(answers[0]!.slice(answers[0]!.indexOf('\r\n\r\n') + 4).replace(/\r\n0\r\n\r\n$/, '').replace(/^[0-9a-f]+\r\n/, '')) as { items: Array<{ request_id: string }> }).items;
    expect(answers[0]).toMatch(/\r\nconnection: close\r\n/i);
    expect(answers).toHaveLength(1);
    const [code] = await child.exit;
    expect(code).toBe(0);

    const audit = new BetterSqlite3(db, { readonly: true });
    const ids = new Set((audit.prepare('SELECT request_id FROM scored_requests').all() as Array<{ request_id: string }>).map((r) => r.request_id));
    audit.close();
    expect(ids.size).toBe(502);
    expect(answered.every((a) => ids.has(a.request_id))).toBe(true);
    expect(child.lines().some((l) => l.msg === 'audit log committed and closed; bye')).toBe(true);
  });

  it('refuses to start when two bundles share a name, naming both files, and exits 2', async () => {
    const models = join(tmp.dir, 'models-b');
    mkdirSync(models);
    await writeBundle(join(models, 'one.bundle.json'), iris());
    await writeBundle(join(models, 'two.bundle.json'), iris());
    const child = serve(['--models', models, '--db', join(tmp.dir, 'b.db')]);
    const stderr: string[] = [];
    child.proc.stderr!.on('data', (c: Buffer) => stderr.push(c.toString()));
    const [code] = await child.exit;
    expect(code).toBe(2);
    expect(stderr.join('')).toContain(`two bundles are named "iris": ${join(models, 'one.bundle.json')} and ${join(models, 'two.bundle.json')}`);
  });

  it('says so in one line, and exits 2, when the port is taken', async () => {
    const blocker = createServer();
    await new Promise<void>((r) => blocker.listen(0, '127.0.0.1', r));
    const port = (blocker.address() as AddressInfo).port;
    const child = serve(['--models', tmp.dir, '--db', join(tmp.dir, 'd.db'), '--port', String(port)]);
    const stderr: string[] = [];
    child.proc.stderr!.on('data', (c: Buffer) => stderr.push(c.toString()));
    const [code] = await child.exit;
    blocker.close();
    expect(code).toBe(2);
    expect(stderr.join('')).toContain(`plumbline: cannot listen on 127.0.0.1:${port} (EADDRINUSE: another process has the port; stop it or pass --port)`);
  });

  it('refuses a bad configuration value, naming the key, the value and its source', async () => {
    const child = serve(['--models', tmp.dir, '--db', join(tmp.dir, 'c.db'), '--config', tmp.file('cfg.json', '{"limits": {"batch_items": -1}}')]);
    const stderr: string[] = [];
    child.proc.stderr!.on('data', (c: Buffer) => stderr.push(c.toString()));
    const [code] = await child.exit;
    expect(code).toBe(2);
    expect(stderr.join('')).toMatch(/limits\.batch_items = -1 \(config file .*cfg\.json\): Too small/);
  });
});
