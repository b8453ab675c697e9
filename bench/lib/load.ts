import { execFile, execFileSync } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
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
  /** Requests answered in the run. */
  requests: number;
  /**
   * CPU time of the server process (user and system, every thread) per request answered, in µs,
   * when the spec names the server's pid and /proc tells (Linux); null otherwise. Unlike the
   * requests a second, this does not depend on whether the load generator kept up.
   */
  serverCpuUs: number | null;
}

export interface LoadSpec {
  url: string;
  body: string;
  connections: number;
  seconds: number;
  /** The server's pid, for its CPU time per request (LoadResult.serverCpuUs). */
  serverPid?: number;
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
    const requests = Number(/(\d+) requests in/.exec(stdout)?.[1] ?? 0);
    const p50 = toMs(/^\s+50%\s+(\S+)/m.exec(stdout)?.[1] ?? '');
    const p99 = toMs(/^\s+99%\s+(\S+)/m.exec(stdout)?.[1] ?? '');
    const non2xx = Number(/Non-2xx or 3xx responses:\s+(\d+)/.exec(stdout)?.[1] ?? 0);
    const errors = /Socket errors: connect (\d+), read (\d+), write (\d+), timeout (\d+)/.exec(stdout);
    const socket = errors ? errors.slice(1).reduce((a, b) => a + Number(b), 0) : 0;
    return { tool: 'wrk', requestsPerSecond: rps, p50Ms: p50, p99Ms: p99, failed: non2xx + socket, requests, serverCpuUs: null };
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
  return { tool: 'autocannon', requestsPerSecond: r.requests.average, p50Ms: r.latency.p50, p99Ms: r.latency.p99, failed: r.non2xx + r.errors + r.timeouts, requests: r.requests.total, serverCpuUs: null };
}

let ticksPerSecond: number | null = null;
/** Clock ticks a second of /proc/<pid>/stat's times (getconf CLK_TCK; 100 on Linux as shipped). */
function clockTicks(): number {
  if (ticksPerSecond === null) {
    try {
      ticksPerSecond = Number(execFileSync('getconf', ['CLK_TCK'], { encoding: 'utf8' }).trim()) || 100;
    } catch {
      ticksPerSecond = 100;
    }
  }
  return ticksPerSecond;
}

/**
 * CPU seconds a process has used, user and system, all its threads (proc(5): utime and stime,
 * fields 14 and 15 of /proc/<pid>/stat, counted after the command name's closing parenthesis);
 * null where there is no /proc.
 */
export function processCpuSeconds(pid: number): number | null {
  try {
    const stat = readFileSync(`/proc/${pid}/stat`, 'utf8');
    const fields = stat.slice(stat.lastIndexOf(')') + 2).split(' ');
    // fields[0] is field 3 (state): utime is field 14, stime field 15.
    return (Number(fields[11]) + Number(fields[12])) / clockTicks();
  } catch {
    return null;
  }
}

/** wrk when it is installed (in C, it leaves more CPU to the server and times in microseconds), else autocannon. */
export async function load(spec: LoadSpec): Promise<LoadResult> {
  const before = spec.serverPid === undefined ? null : processCpuSeconds(spec.serverPid);
  const result = await (hasWrk() ? wrk(spec) : cannon(spec));
  const after = spec.serverPid === undefined ? null : processCpuSeconds(spec.serverPid);
  if (before !== null && after !== null && result.requests > 0) result.serverCpuUs = ((after - before) * 1e6) / result.requests;
  return result;
}
