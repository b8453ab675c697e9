import { execFile, execFileSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { promisify } from 'node:util';
import autocannon from 'autocannon';

export interface LoadResult {
  tool: 'wrk' | 'autocannon';
  requestsPerSecond: number;
  p50Ms: number;
  p99Ms: number;
  /** Answers that were not 2xx, and socket errors. */
  failed: number;
}

export interface LoadSpec {
  url: string;
  body: string;
  connections: number;
  seconds: number;
  /**
   * Requests a second to hold; unset for as fast as it goes. With wrk, each connection waits
   * connections / rate between its requests (wrk's delay()), so the rate is held only while the
   * latency is far below that wait, as it is here; latency is timed by wrk in microseconds.
   */
  rate?: number;
}

const run = promisify(execFile);

export function hasWrk(): boolean {
  try {
    execFileSync('wrk', ['--version'], { stdio: 'ignore' });
    return true;
  } catch (err) {
    // wrk --version exits 1 after printing its version
    return (err as { status?: number }).status === 1;
  }
}

const toMs = (v: string): number => {
  const m = /^([\d.]+)(us|ms|s)$/.exec(v.trim());
  if (!m) return Number.NaN;
  const n = Number(m[1]);
  return m[2] === 'us' ? n / 1000 : m[2] === 's' ? n * 1000 : n;
};

/** wrk (Debian's), one thread, POSTing the body as JSON. */
async function wrk(spec: LoadSpec): Promise<LoadResult> {
  const dir = mkdtempSync(join(tmpdir(), 'plumbline-wrk-'));
  try {
    const script = join(dir, 'post.lua');
    const pace = spec.rate === undefined ? '' : `function delay()\n  return ${((1000 * spec.connections) / spec.rate).toFixed(3)}\nend\n`;
    writeFileSync(script, `wrk.method = "POST"\nwrk.headers["Content-Type"] = "application/json"\nwrk.body = [==[${spec.body}]==]\n${pace}`);
    const { stdout } = await run('wrk', ['-t1', `-c${spec.connections}`, `-d${spec.seconds}s`, '--latency', '-s', script, spec.url], { maxBuffer: 1 << 20 });
    const rps = Number(/Requests\/sec:\s+([\d.]+)/.exec(stdout)?.[1]);
    const p50 = toMs(/^\s+50%\s+(\S+)/m.exec(stdout)?.[1] ?? '');
    const p99 = toMs(/^\s+99%\s+(\S+)/m.exec(stdout)?.[1] ?? '');
    const non2xx = Number(/Non-2xx or 3xx responses:\s+(\d+)/.exec(stdout)?.[1] ?? 0);
    const errors = /Socket errors: connect (\d+), read (\d+), write (\d+), timeout (\d+)/.exec(stdout);
    const socket = errors ? errors.slice(1).reduce((a, b) => a + Number(b), 0) : 0;
    return { tool: 'wrk', requestsPerSecond: rps, p50Ms: p50, p99Ms: p99, failed: non2xx + socket };
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
}

async function cannon(spec: LoadSpec): Promise<LoadResult> {
  const r = await autocannon({
    url: spec.url,
    method: 'POST',
    headers: { 'content-type': 'application/json' },
    body: spec.body,
    connections: spec.connections,
    duration: spec.seconds,
    ...(spec.rate !== undefined ? { overallRate: spec.rate } : {}),
  });
  return { tool: 'autocannon', requestsPerSecond: r.requests.average, p50Ms: r.latency.p50, p99Ms: r.latency.p99, failed: r.non2xx + r.errors + r.timeouts };
}

/** wrk when it is installed (in C, it leaves more CPU to the server and times in microseconds), else autocannon. */
export async function load(spec: LoadSpec): Promise<LoadResult> {
  return hasWrk() ? wrk(spec) : cannon(spec);
}
