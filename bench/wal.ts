// The write-ahead log under sustained load: the service in a process of its own, driven as fast as
// it goes on POST score and then on POST score-batch, while this process samples the size of the
// database's -wal file every 50 ms. The figure is the largest size seen, against log.wal_max_bytes.
// Loopback only.
//   npx tsx bench/wal.ts [--seconds 30] [--connections 4] [--batch 100] [--writer event-loop|thread]
import { mkdtempSync, rmSync, statSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { configSchema } from '../src/config/config.js';
import { DEMO_SHOT } from './lib/bundles.js';
import { startChild } from './lib/child.js';
import { type LoadResult, load } from './lib/load.js';

export interface WalFigures {
  route: 'score' | 'score-batch';
  writer: 'event-loop' | 'thread';
  seconds: number;
  connections: number;
  /** Items per score-batch request (1 for score). */
  items: number;
  load: LoadResult;
  /** Rows committed during the run. */
  rows: number;
  /** Largest -wal file seen, bytes. */
  walMaxBytes: number;
  /** The bound the service was run with (log.wal_max_bytes). */
  boundBytes: number;
  /** The database file at the end, bytes. */
  dbBytes: number;
}

const size = (file: string): number => statSync(file, { throwIfNoEntry: false })?.size ?? 0;

/** Samples a file's size every `everyMs` until stopped; returns the largest. */
function watchSize(file: string, everyMs: number): { stop(): number } {
  let max = size(file);
  const timer = setInterval(() => {
    max = Math.max(max, size(file));
  }, everyMs);
  return {
    stop() {
      clearInterval(timer);
      return Math.max(max, size(file));
    },
  };
}

export async function measureWal(o: { route: 'score' | 'score-batch'; seconds: number; connections: number; items: number; writer?: 'event-loop' | 'thread' }): Promise<WalFigures> {
  const dir = mkdtempSync(join(tmpdir(), 'plumbline-bench-wal-'));
  const db = join(dir, 'wal.db');
  const writer = o.writer ?? 'event-loop';
  const boundBytes = configSchema.parse({}).log.wal_max_bytes;
  // The rate limit is off: one address sends everything here.
  const server = await startChild<{ url: string }>('../test/fixtures/serve-child.ts', [db, JSON.stringify({ limits: { requests_per_minute: 0, batch_items: Math.max(1000, o.items) }, log: { writer }, retention_days: 0 })]);
  try {
    const rowsBefore = await committedRows(server.info.url);
    const item = { features: DEMO_SHOT, tags: { line: '3', cell: 'moulding-3' } };
    const body = o.route === 'score' ? JSON.stringify(item) : JSON.stringify({ items: Array.from({ length: o.items }, () => item) });
    const watch = watchSize(`${db}-wal`, 50);
    const result = await load({ url: `${server.info.url}/v1/models/moulding-quality/${o.route}`, body, connections: o.connections, seconds: o.seconds });
    const walMaxBytes = watch.stop();
    const rows = (await committedRows(server.info.url)) - rowsBefore;
    return { route: o.route, writer, seconds: o.seconds, connections: o.connections, items: o.route === 'score' ? 1 : o.items, load: result, rows, walMaxBytes, boundBytes, dbBytes: size(db) };
  } finally {
    await server.stop();
    rmSync(dir, { recursive: true, force: true });
  }
}

/** Scored rows committed so far, from the service's own counter. */
async function committedRows(url: string): Promise<number> {
  const text = await (await fetch(`${url}/metrics`)).text();
  let sum = 0;
  for (const line of text.split('\n')) if (line.startsWith('plumbline_scored_total{')) sum += Number(line.slice(line.lastIndexOf(' ') + 1));
  return sum;
}

const mib = (b: number): string => (b / 2 ** 20).toFixed(1);

export function describeWal(f: WalFigures): string {
  return `${f.route}${f.route === 'score-batch' ? ` x ${f.items}` : ''}, ${f.connections} connections, ${f.seconds} s, log.writer ${f.writer}: ${f.rows.toLocaleString('en-GB')} rows at ${f.load.requestsPerSecond.toFixed(0)} req/s (${f.load.failed} failed); largest WAL ${mib(f.walMaxBytes)} MiB (bound ${mib(f.boundBytes)} MiB); database ${mib(f.dbBytes)} MiB`;
}

if (process.argv[1] === fileURLToPath(import.meta.url)) {
  const arg = (name: string, fallback: number): number => {
    const i = process.argv.indexOf(`--${name}`);
    return i > 0 ? Number(process.argv[i + 1]) : fallback;
  };
  const w = process.argv.indexOf('--writer');
  const writer = (w > 0 ? process.argv[w + 1] : 'event-loop') as 'event-loop' | 'thread';
  const seconds = arg('seconds', 30);
  const connections = arg('connections', 4);
  const items = arg('batch', 100);
  for (const route of ['score', 'score-batch'] as const) {
    console.log(describeWal(await measureWal({ route, seconds, connections, items, writer })));
  }
}
