// Throughput of 1, 2 and 3 replicas on one PostgreSQL database against one replica on SQLite,
// measured side by side in one run: POST score with the demo bundle, the audit log on, as fast as
// the load generator goes. Each replica is its own process (bench/http-server.ts); the load is one
// wrk (or autocannon) per replica at once, the connections split between them, and the figure is
// the sum of their answers per second. Everything runs on this machine: the server's cores are
// shared with PostgreSQL and the load generators, so the figures show what one machine gives,
// not what N machines would. PostgreSQL is a throwaway server (test/helpers/pg-server.ts),
// fsync off as in the tests, synchronous_commit on.
//   npx tsx bench/replicas.ts [--seconds N] [--connections N]
import { fileURLToPath } from 'node:url';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import pg from 'pg';
import { startChild } from './lib/child.js';
import { type LoadResult, load } from './lib/load.js';
import { serverBinaries, startThrowawayServer } from '../test/helpers/pg-server.js';

export interface ReplicaFigures {
  store: 'sqlite' | 'postgres';
  replicas: number;
  requestsPerSecond: number;
  p50Ms: number;
  p99Ms: number;
  failed: number;
}

const MODELS = fileURLToPath(new URL('../demo-data/models', import.meta.url));
const SHOT = [232.1, 53.8, 923, 478, 3.48, 14.18, 102, 5.4, 23.7, 47.93];
const CONFIG = JSON.stringify({ limits: { requests_per_minute: 0 } });

async function measure(store: 'sqlite' | 'postgres', db: string, replicas: number, seconds: number, connections: number): Promise<ReplicaFigures> {
  const servers = [];
  for (let i = 0; i < replicas; i++) servers.push(await startChild<{ url: string }>('http-server.ts', [MODELS, db, 'moulding-quality', JSON.stringify(SHOT), CONFIG]));
  try {
    const body = JSON.stringify({ features: SHOT, tags: { line: '3' } });
    const per = Math.max(1, Math.round(connections / replicas));
    // A short warm-up, then the timed run on every replica at once.
    await Promise.all(servers.map((s) => load({ url: `${s.info.url}/v1/models/moulding-quality/score`, body, connections: per, seconds: 1 })));
    const results: LoadResult[] = await Promise.all(servers.map((s) => load({ url: `${s.info.url}/v1/models/moulding-quality/score`, body, connections: per, seconds })));
    return {
      store,
      replicas,
      requestsPerSecond: results.reduce((a, r) => a + r.requestsPerSecond, 0),
      p50Ms: Math.max(...results.map((r) => r.p50Ms)),
      p99Ms: Math.max(...results.map((r) => r.p99Ms)),
      failed: results.reduce((a, r) => a + r.failed, 0),
    };
  } finally {
    await Promise.all(servers.map((s) => s.stop()));
  }
}

export async function measureReplicas(o: { seconds: number; connections: number }): Promise<ReplicaFigures[] | { skipped: string }> {
  const found = serverBinaries();
  if ('missing' in found) return { skipped: found.missing };
  const server = await startThrowawayServer(found.bin);
  const dir = mkdtempSync(join(tmpdir(), 'plumbline-bench-replicas-'));
  try {
    const out: ReplicaFigures[] = [];
    out.push(await measure('sqlite', join(dir, 'one.db'), 1, o.seconds, o.connections));
    for (const n of [1, 2, 3]) {
      const name = `bench_${n}`;
      const admin = new pg.Client({ connectionString: server.url });
      await admin.connect();
      await admin.query(`CREATE DATABASE ${name}`);
      await admin.end();
      const url = new URL(server.url);
      url.pathname = `/${name}`;
      out.push(await measure('postgres', url.toString(), n, o.seconds, o.connections));
    }
    return out;
  } finally {
    server.remove();
    rmSync(dir, { recursive: true, force: true });
  }
}

export function replicasTable(figures: ReplicaFigures[]): string[] {
  const sqlite = figures.find((f) => f.store === 'sqlite');
  return [
    '| store | replicas | answers/s (sum) | vs SQLite | p50 ms (worst replica) | p99 ms (worst replica) | not 2xx |',
    '|---|---:|---:|---:|---:|---:|---:|',
    ...figures.map(
      (f) =>
        `| ${f.store} | ${f.replicas} | ${f.requestsPerSecond.toFixed(0)} | ${sqlite ? (f.requestsPerSecond / sqlite.requestsPerSecond).toFixed(2) : '-'} | ${f.p50Ms.toFixed(2)} | ${f.p99Ms.toFixed(2)} | ${f.failed} |`,
    ),
  ];
}

if (import.meta.url === `file://${process.argv[1]}`) {
  const arg = (name: string, d: number): number => {
    const i = process.argv.indexOf(name);
    return i >= 0 ? Number(process.argv[i + 1]) : d;
  };
  const r = await measureReplicas({ seconds: arg('--seconds', 10), connections: arg('--connections', 32) });
  if ('skipped' in r) process.stdout.write(`skipped: ${r.skipped}\n`);
  else process.stdout.write(`${replicasTable(r).join('\n')}\n`);
}
