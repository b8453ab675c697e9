// Benchmark: a drift report over N logged rows against a bare better-sqlite3 iteration over the
// same rows, and the peak memory of a process that builds the report. Run: npx tsx bench/drift-report.ts [rows ...]
// Rows are the demo traffic's answers, repeated with timestamps spread over one day.
import { spawn } from 'node:child_process';
import { once } from 'node:events';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import BetterSqlite3 from 'better-sqlite3';
import { createScorer } from '../src/bundle/scorer.js';
import { readBundle } from '../src/bundle/verify.js';
import { serializeBundle } from '../src/bundle/write.js';
import { DEMO_DATA_DIR } from '../src/demo/paths.js';
import { openCsv } from '../src/io/csv.js';
import { parseFeatures, planColumns } from '../src/io/feature-table.js';
import { buildDriftReport } from '../src/reports/build-report.js';
import { openStore } from '../src/store/store.js';
import type { ScoredRow } from '../src/store/request-log.js';

const sizes = process.argv[2] === '--child' ? [] : process.argv.slice(2).map(Number).filter((n) => n > 0);
const DAY = 86_400_000;
const dayStart = Date.parse('2026-11-30T00:00:00Z');

export async function baseRows(): Promise<Omit<ScoredRow, 'requestId' | 'receivedAt'>[]> {
  const bundle = await readBundle(join(DEMO_DATA_DIR, 'models/moulding-quality.bundle.json'));
  const scorer = createScorer(bundle);
  const out: Omit<ScoredRow, 'requestId' | 'receivedAt'>[] = [];
  for (const file of ['traffic-normal.csv', 'traffic-drifted.csv', 'traffic-faulted.csv']) {
    const csv = await openCsv(join(DEMO_DATA_DIR, file));
    const plan = planColumns(csv.header, file, { features: [...scorer.featureNames] });
    for await (const row of csv.rows) {
      const x = new Float64Array(plan.featureNames.length);
      parseFeatures(row.fields, row.line, plan, file, x, 0);
      const [o] = scorer.scoreRows(x, 1);
      const a = o!;
      out.push({
        batchId: null,
        model: { sha256: bundle.file.sha256, name: bundle.file.name, version: bundle.file.version },
        features: x,
        tags: null,
        label: a.label,
        probabilities: bundle.file.classes.map((c) => a.probabilities[c] as number),
        margin: a.margin,
        inDomain: a.domain.in_domain,
        review: a.review,
        domain: { checks: a.domain.checks, outside: a.domain.outside },
        latencyUs: 100,
      });
    }
  }
  return out;
}

export interface DriftFigures {
  rows: number;
  reportMs: number;
  bareMs: number;
  ratio: number;
  peakRssMb: number;
}

export async function measureDrift(n: number, base?: Awaited<ReturnType<typeof baseRows>>): Promise<DriftFigures> {
  const rows = base ?? (await baseRows());
  const dir = mkdtempSync(join(tmpdir(), 'plumbline-bench-'));
  const file = join(dir, 'bench.db');
  const store = openStore(file, { sync: 'normal', flushMs: 0, flushRows: 50_000, queueRows: 200_000, rejectedRows: 10 });
  const bundle = await readBundle(join(DEMO_DATA_DIR, 'models/moulding-quality.bundle.json'));
  store.recordModel({ sha256: bundle.file.sha256, name: bundle.file.name, version: bundle.file.version, features: bundle.file.features, classes: bundle.file.classes, bundle: serializeBundle(bundle.file) });
  for (let start = 0; start < n; start += 50_000) {
    const chunk: ScoredRow[] = [];
    for (let i = start; i < Math.min(n, start + 50_000); i++) {
      chunk.push({ ...(rows[i % rows.length] as (typeof rows)[number]), requestId: `b-${i}`, receivedAt: dayStart + Math.floor((i * DAY) / n) });
    }
    await store.log.append(chunk);
  }
  store.close();

  // Bare iteration: the same rows and columns, decoded, nothing computed.
  const db = new BetterSqlite3(file, { readonly: true });
  const t0 = performance.now();
  let sum = 0;
  for (const r of db.prepare('SELECT received_at, features, label, margin, in_domain, review FROM scored_requests WHERE model_sha256 = ? AND received_at >= ? AND received_at < ? ORDER BY received_at, seq').iterate(bundle.file.sha256, dayStart, dayStart + DAY) as IterableIterator<{ features: Buffer; margin: number }>) {
    for (let j = 0; j < 10; j++) sum += r.features.readDoubleLE(j * 8);
    sum += r.margin;
  }
  const bareMs = performance.now() - t0;
  db.close();

  // The report runs in a child process of its own, so that its peak resident set (getrusage
  // maxrss) is the report's and not this process's, which has just held every row in memory.
  const child = await runChild(file, bundle.file.sha256);
  rmSync(dir, { recursive: true, force: true });
  if (child.scored !== n || !Number.isFinite(sum)) throw new Error('benchmark rows went missing');
  return { rows: n, reportMs: child.reportMs, bareMs, ratio: child.reportMs / bareMs, peakRssMb: child.maxRssKb / 1024 };
}

interface ChildFigures {
  reportMs: number;
  maxRssKb: number;
  scored: number;
}

async function runChild(file: string, sha256: string): Promise<ChildFigures> {
  const child = spawn(process.execPath, ['--import', 'tsx', fileURLToPath(import.meta.url), '--child', file, sha256], { stdio: ['ignore', 'pipe', 'inherit'] });
  let out = '';
  child.stdout.on('data', (b: Buffer) => (out += b.toString()));
  const [code] = (await once(child, 'exit')) as [number | null];
  if (code !== 0) throw new Error(`the report child exited with ${code}`);
  return JSON.parse(out) as ChildFigures;
}

async function childMain(file: string): Promise<void> {
  const bundle = await readBundle(join(DEMO_DATA_DIR, 'models/moulding-quality.bundle.json'));
  const store = openStore(file, { sync: 'normal', flushMs: 0, flushRows: 1, queueRows: 1, rejectedRows: 10 });
  const t = performance.now();
  const report = await buildDriftReport(store.drift, bundle, { from: dayStart, to: dayStart + DAY }, { id: 'bench', createdAt: new Date() });
  const reportMs = performance.now() - t;
  store.close();
  process.stdout.write(JSON.stringify({ reportMs, maxRssKb: process.resourceUsage().maxRSS, scored: report.counts.scored } satisfies ChildFigures));
}

if (process.argv[2] === '--child') {
  await childMain(process.argv[3] as string);
} else if (process.argv[1]?.endsWith('drift-report.ts')) {
  const base = await baseRows();
  for (const n of sizes.length ? sizes : [10_000, 100_000, 1_000_000]) {
    const f = await measureDrift(n, base);
    console.log(`${String(f.rows).padStart(9)} rows: report ${f.reportMs.toFixed(0)} ms, bare iteration ${f.bareMs.toFixed(0)} ms, ratio ${f.ratio.toFixed(2)}, peak RSS ${f.peakRssMb.toFixed(0)} MB`);
  }
}
