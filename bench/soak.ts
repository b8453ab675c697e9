// Soak: the service in a process of its own, scoring at a steady rate for a long time (10 minutes
// by default), score and score-batch side by side, its memory sampled from /metrics and the size
// of its -wal file from here. Reports how memory and latency moved between the end of the warm-up
// and the end, and the largest WAL against log.wal_max_bytes. Loopback only.
//   npx tsx bench/soak.ts [--minutes 10] [--rate 400] [--batch-rate 2] [--connections 8] [--writer event-loop|thread]
import { mkdtempSync, rmSync, statSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import autocannon from 'autocannon';
import { configSchema } from '../src/config/config.js';
import { DEMO_SHOT } from './lib/bundles.js';
import { startChild } from './lib/child.js';

const arg = (name: string, fallback: number): number => {
  const i = process.argv.indexOf(`--${name}`);
  return i > 0 ? Number(process.argv[i + 1]) : fallback;
};
const MINUTES = arg('minutes', 10);
const RATE = arg('rate', 400);
/** score-batch requests a second, of BATCH_ITEMS items each, beside the score requests. */
const BATCH_RATE = arg('batch-rate', 2);
const BATCH_ITEMS = 100;
const CONNECTIONS = arg('connections', 8);
const WRITER = process.argv.includes('--writer') ? (process.argv[process.argv.indexOf('--writer') + 1] as string) : 'event-loop';
const WARMUP_S = Math.min(60, (MINUTES * 60) / 5);
const SAMPLE_S = 10;

interface Sample {
  t: number;
  rssMb: number;
  heapMb: number;
  scored: number;
}

const metric = (text: string, name: string): number => {
  let sum = 0;
  for (const line of text.split('\n')) if (line.startsWith(name) && (line[name.length] === ' ' || line[name.length] === '{')) sum += Number(line.slice(line.lastIndexOf(' ') + 1));
  return sum;
};

async function sample(url: string, t0: number): Promise<Sample> {
  const text = await (await fetch(`${url}/metrics`)).text();
  return {
    t: (Date.now() - t0) / 1000,
    rssMb: metric(text, 'plumbline_process_resident_memory_bytes') / 2 ** 20,
    heapMb: metric(text, 'plumbline_nodejs_heap_size_used_bytes') / 2 ** 20,
    scored: metric(text, 'plumbline_scored_total'),
  };
}

/** Least-squares slope of y on x. */
function slope(xs: number[], ys: number[]): number {
  const n = xs.length;
  const mx = xs.reduce((a, b) => a + b, 0) / n;
  const my = ys.reduce((a, b) => a + b, 0) / n;
  let sxy = 0;
  let sxx = 0;
  for (let i = 0; i < n; i++) {
    sxy += ((xs[i] as number) - mx) * ((ys[i] as number) - my);
    sxx += ((xs[i] as number) - mx) ** 2;
  }
  return sxx === 0 ? 0 : sxy / sxx;
}

const dir = mkdtempSync(join(tmpdir(), 'plumbline-soak-'));
const db = join(dir, 'soak.db');
const server = await startChild<{ url: string }>('../test/fixtures/serve-child.ts', [db, JSON.stringify({ limits: { requests_per_minute: 0 }, log: { writer: WRITER } })]);
const { url } = server.info;
const t0 = Date.now();
const samples: Sample[] = [];
const timer = setInterval(() => void sample(url, t0).then((s) => samples.push(s), () => undefined), SAMPLE_S * 1000);
samples.push(await sample(url, t0));
// The WAL is sampled more often than memory: it can grow and be cut within seconds.
const walSize = (): number => statSync(`${db}-wal`, { throwIfNoEntry: false })?.size ?? 0;
let walMax = walSize();
const walTimer = setInterval(() => {
  walMax = Math.max(walMax, walSize());
}, 250);
const walBound = configSchema.parse({}).log.wal_max_bytes;
console.log(`soak: ${MINUTES} min at ${RATE} score requests/s over ${CONNECTIONS} connections, and ${BATCH_RATE} score-batch requests/s of ${BATCH_ITEMS} items over 2, against ${url}, log.writer ${WRITER} (warm-up ${WARMUP_S} s)`);

const item = { features: DEMO_SHOT, tags: { line: '3', cell: 'moulding-3' } };
const [result, batches] = await Promise.all([
  autocannon({
    url: `${url}/v1/models/moulding-quality/score`,
    method: 'POST',
    headers: { 'content-type': 'application/json' },
    body: JSON.stringify(item),
    connections: CONNECTIONS,
    overallRate: RATE,
    duration: MINUTES * 60,
  }),
  autocannon({
    url: `${url}/v1/models/moulding-quality/score-batch`,
    method: 'POST',
    headers: { 'content-type': 'application/json' },
    body: JSON.stringify({ items: Array.from({ length: BATCH_ITEMS }, () => item) }),
    connections: 2,
    overallRate: BATCH_RATE,
    duration: MINUTES * 60,
  }),
]);
clearInterval(timer);
clearInterval(walTimer);
walMax = Math.max(walMax, walSize());
samples.push(await sample(url, t0));
await server.stop();
const dbMb = (statSync(db).size + (statSync(`${db}-wal`, { throwIfNoEntry: false })?.size ?? 0)) / 2 ** 20;
rmSync(dir, { recursive: true, force: true });

const steady = samples.filter((s) => s.t >= WARMUP_S);
const first = steady[0] ?? samples[0]!;
const last = samples[samples.length - 1]!;
const rssSlope = slope(steady.map((s) => s.t / 3600), steady.map((s) => s.rssMb));
const heapSlope = slope(steady.map((s) => s.t / 3600), steady.map((s) => s.heapMb));
const non2xx = result.non2xx + result.errors + result.timeouts;
const batchNon2xx = batches.non2xx + batches.errors + batches.timeouts;
console.log(`requests: ${result.requests.total} score sent, ${result['2xx']} answered 200, ${non2xx} not (errors ${result.errors}, timeouts ${result.timeouts}); ${batches.requests.total} score-batch sent, ${batches['2xx']} answered 200, ${batchNon2xx} not; ${last.scored} scored and logged`);
console.log(`rate: ${result.requests.average.toFixed(0)} requests/s on average; latency p50 ${result.latency.p50} ms, p99 ${result.latency.p99} ms, max ${result.latency.max} ms`);
console.log(`memory after warm-up (t=${first.t.toFixed(0)} s): RSS ${first.rssMb.toFixed(1)} MB, heap ${first.heapMb.toFixed(1)} MB`);
console.log(`memory at the end   (t=${last.t.toFixed(0)} s): RSS ${last.rssMb.toFixed(1)} MB, heap ${last.heapMb.toFixed(1)} MB`);
console.log(`growth, least squares over ${steady.length} samples: RSS ${rssSlope.toFixed(1)} MB/h, heap ${heapSlope.toFixed(1)} MB/h; peak RSS ${Math.max(...samples.map((s) => s.rssMb)).toFixed(1)} MB`);
console.log(`database after the run: ${dbMb.toFixed(1)} MB (${((dbMb * 2 ** 20) / Math.max(1, last.scored)).toFixed(0)} bytes a row); largest -wal file ${(walMax / 2 ** 20).toFixed(1)} MiB (log.wal_max_bytes ${(walBound / 2 ** 20).toFixed(0)} MiB), sampled every 250 ms`);
