// Benchmark: a drift report over N rows logged in PostgreSQL against a bare server-side-cursor
// scan of the same rows from Node (the same DECLARE/FETCH pages, nothing done per row), and the
// peak memory of the process that builds the report. Each in a process of its own.
//   npx tsx bench/drift-postgres.ts [rows]        (default 1,000,000)
// Rows are the demo traffic's answers, repeated, with timestamps spread over one day, written
// server-side (generate_series over arrays of the demo rows). The chain hashes are not real: the
// report does not read them. PostgreSQL is a throwaway server (test/helpers/pg-server.ts).
import { spawn } from 'node:child_process';
import { once } from 'node:events';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import pg from 'pg';
import { readBundle } from '../src/bundle/verify.js';
import { serializeBundle } from '../src/bundle/write.js';
import { DEMO_DATA_DIR } from '../src/demo/paths.js';
import { buildDriftReport } from '../src/reports/build-report.js';
import { openStoreAt } from '../src/store/open.js';
import { createPool } from '../src/store/postgres/pool.js';
import { cursorPages } from '../src/store/postgres/drift.js';
import { toFloat64Blob } from '../src/store/float64-blob.js';
import { serverBinaries, startThrowawayServer } from '../test/helpers/pg-server.js';
import { baseRows } from './drift-report.js';

const DAY = 86_400_000;
const dayStart = Date.parse('2026-11-30T00:00:00Z');
const OPTIONS = { sync: 'normal', flushMs: 0, flushRows: 1, queueRows: 1, rejectedRows: 10 } as const;
const SCAN = 'SELECT received_at, features, label, margin, in_domain, review FROM scored_requests WHERE model_sha256 = $1 AND received_at >= $2 AND received_at < $3 ORDER BY received_at, seq';

async function fill(url: string, n: number): Promise<string> {
  const bundle = await readBundle(join(DEMO_DATA_DIR, 'models/moulding-quality.bundle.json'));
  const store = await openStoreAt(url, OPTIONS);
  const b = bundle.file;
  await store.recordModel({ sha256: b.sha256, name: b.name, version: b.version, features: b.features, classes: b.classes, bundle: serializeBundle(b) });
  await store.close();
  const base = await baseRows();
  const client = new pg.Client({ connectionString: url });
  await client.connect();
  const k = base.length;
  const arrays = [
    base.map((r) => toFloat64Blob(r.features)),
    base.map((r) => r.label),
    base.map((r) => toFloat64Blob(r.probabilities)),
    base.map((r) => r.margin),
    base.map((r) => (r.inDomain ? 1 : 0)),
    base.map((r) => (r.review ? 1 : 0)),
    base.map((r) => JSON.stringify(r.domain)),
  ];
  const step = 100_000;
  for (let from = 1; from <= n; from += step) {
    const to = Math.min(n, from + step - 1);
    await client.query(
      `INSERT INTO scored_requests (seq, request_id, batch_id, received_at, model_sha256, model_name, model_version, features, tags, label, probabilities, margin, in_domain, review, domain, latency_us, key_label, explained, chain_hash)
       SELECT g, 'b' || g, NULL, $1::bigint + (g::bigint * $2::bigint) / $3::bigint, $4, $5, $6, ($7::bytea[])[1 + g % $8], NULL, ($9::text[])[1 + g % $8], ($10::bytea[])[1 + g % $8],
              ($11::float8[])[1 + g % $8], ($12::smallint[])[1 + g % $8], ($13::smallint[])[1 + g % $8], ($14::text[])[1 + g % $8], 100, NULL, 0, '\\x00'::bytea
       FROM generate_series($15::bigint, $16::bigint) g`,
      [dayStart, DAY - 1, n, b.sha256, b.name, b.version, arrays[0], k, arrays[1], arrays[2], arrays[3], arrays[4], arrays[5], arrays[6], from, to],
    );
  }
  await client.query('ANALYZE scored_requests');
  await client.end();
  return b.sha256;
}

interface ChildFigures {
  ms: number;
  maxRssKb: number;
  rows: number;
}

async function runChild(mode: 'report' | 'scan', url: string, sha256: string): Promise<ChildFigures> {
  const child = spawn(process.execPath, ['--import', 'tsx', fileURLToPath(import.meta.url), `--${mode}`, url, sha256], { stdio: ['ignore', 'pipe', 'inherit'] });
  let out = '';
  child.stdout.on('data', (c: Buffer) => (out += c.toString()));
  const [code] = (await once(child, 'exit')) as [number | null];
  if (code !== 0) throw new Error(`the ${mode} child exited with ${code}`);
  return JSON.parse(out) as ChildFigures;
}

async function childMain(mode: string, url: string, sha256: string): Promise<void> {
  const t = performance.now();
  let rows = 0;
  if (mode === '--report') {
    const bundle = await readBundle(join(DEMO_DATA_DIR, 'models/moulding-quality.bundle.json'));
    const store = await openStoreAt(url, OPTIONS);
    const report = await buildDriftReport(store.drift, bundle, { from: dayStart, to: dayStart + DAY }, { id: 'bench', createdAt: new Date() });
    rows = report.counts.scored;
    await store.close();
  } else {
    const pool = createPool({ url, poolSize: 2, statementTimeoutMs: 600_000, connectTimeoutMs: 5000 }, () => undefined);
    for await (const page of cursorPages(pool, SCAN, [sha256, dayStart, dayStart + DAY])) rows += page.length;
    await pool.end();
  }
  const ms = performance.now() - t;
  process.stdout.write(JSON.stringify({ ms, maxRssKb: process.resourceUsage().maxRSS, rows } satisfies ChildFigures));
}

export interface DriftServerFigures {
  rows: number;
  reportMs: number;
  scanMs: number;
  ratio: number;
  peakRssMb: number;
}

export async function measureDriftOnServer(n: number): Promise<DriftServerFigures | { skipped: string }> {
  const found = serverBinaries();
  if ('missing' in found) return { skipped: found.missing };
  const server = await startThrowawayServer(found.bin);
  try {
    const sha256 = await fill(server.url, n);
    // The scan first, then the report, then the scan again: the better of the two scans, so that
    // a cold cache counts against neither.
    const scan1 = await runChild('scan', server.url, sha256);
    const report = await runChild('report', server.url, sha256);
    const scan2 = await runChild('scan', server.url, sha256);
    const scanMs = Math.min(scan1.ms, scan2.ms);
    if (report.rows !== n || scan1.rows !== n) throw new Error(`expected ${n} rows, the report saw ${report.rows} and the scan ${scan1.rows}`);
    return { rows: n, reportMs: report.ms, scanMs, ratio: report.ms / scanMs, peakRssMb: report.maxRssKb / 1024 };
  } finally {
    server.remove();
  }
}

if (process.argv[2] === '--report' || process.argv[2] === '--scan') {
  await childMain(process.argv[2], process.argv[3] as string, process.argv[4] as string);
} else if (process.argv[1]?.endsWith('drift-postgres.ts')) {
  const n = Number(process.argv[2] ?? 1_000_000);
  const f = await measureDriftOnServer(n);
  if ('skipped' in f) console.log(`skipped: ${f.skipped}`);
  else console.log(`${f.rows} rows in PostgreSQL: report ${f.reportMs.toFixed(0)} ms, bare cursor scan ${f.scanMs.toFixed(0)} ms, ratio ${f.ratio.toFixed(2)}, peak RSS of the report ${f.peakRssMb.toFixed(0)} MB`);
}
