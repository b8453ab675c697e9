import { type ChildProcess, spawn } from 'node:child_process';
import { once } from 'node:events';
import { mkdirSync, writeFileSync } from 'node:fs';
import { type IncomingMessage, request } from 'node:http';
import { join } from 'node:path';
import BetterSqlite3 from 'better-sqlite3';
import { afterAll, describe, expect, it } from 'vitest';
import { serializeBundle, writeBundle } from '../../src/bundle/write.js';
import { tempDir } from '../helpers/datasets.js';
import { SETOSA, iris } from '../helpers/service.js';

const tmp = tempDir();
afterAll(() => tmp.remove());

interface Child {
  proc: ChildProcess;
  url: Promise<string>;
  lines: () => Array<Record<string, unknown>>;
  exit: Promise<[number | null, string | null]>;
}

function serve(args: string[]): Child {
  const proc = spawn(process.execPath, ['--import', 'tsx', 'src/cli/main.ts', 'serve', '--port', '0', ...args], { stdio: ['ignore', 'pipe', 'pipe'] });
  let out = '';
  let err = '';
  proc.stderr!.on('data', (c: Buffer) => (err += c.toString()));
  const url = new Promise<string>((resolve, reject) => {
    proc.stdout!.on('data', (c: Buffer) => {
      out += c.toString();
      const m = /Server listening at (http:\/\/127\.0\.0\.1:\d+)/.exec(out);
      if (m) resolve(m[1] as string);
    });
    proc.on('exit', () => reject(new Error(`exited before listening: ${err || out}`)));
  });
  url.catch(() => undefined);
  const parsed = (): Array<Record<string, unknown>> =>
    `${out}${err}`
      .split('\n')
      .filter((l) => l.startsWith('{'))
      .map((l) => JSON.parse(l) as Record<string, unknown>);
  return { proc, url, lines: parsed, exit: once(proc, 'exit') as Promise<[number | null, string | null]> };
}

async function waitFor(check: () => boolean, ms = 10_000): Promise<void> {
  const until = Date.now() + ms;
  while (!check()) {
    if (Date.now() > until) throw new Error('timed out');
    await new Promise((r) => setTimeout(r, 25));
  }
}

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

    // Half a body is sent, then SIGTERM, then the rest: the request is surely in flight.
    const body = JSON.stringify({ items: new Array(500).fill({ features: SETOSA }) });
    const req = request(`${base}/v1/models/iris/score-batch`, { method: 'POST', headers: { 'content-type': 'application/json', 'content-length': Buffer.byteLength(body) } });
    const response = once(req, 'response') as Promise<[IncomingMessage]>;
    req.write(body.slice(0, 1000));
    await new Promise((r) => setTimeout(r, 150));
    child.proc.kill('SIGTERM');
    await waitFor(() => child.lines().some((l) => l.msg === 'shutting down: finishing in-flight requests'));
    req.end(body.slice(1000));
    const [res] = await response;
    let text = '';
    for await (const chunk of res) text += chunk;
    expect(res.statusCode).toBe(200);
    const answered = (JSON.parse(text) as { items: Array<{ request_id: string }> }).items;
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

  it('refuses a bad configuration value, naming the key, the value and its source', async () => {
    const child = serve(['--models', tmp.dir, '--db', join(tmp.dir, 'c.db'), '--config', tmp.file('cfg.json', '{"limits": {"batch_items": -1}}')]);
    const stderr: string[] = [];
    child.proc.stderr!.on('data', (c: Buffer) => stderr.push(c.toString()));
    const [code] = await child.exit;
    expect(code).toBe(2);
    expect(stderr.join('')).toMatch(/limits\.batch_items = -1 \(config file .*cfg\.json\): Too small/);
  });
});
