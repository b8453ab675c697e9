// All the benchmarks in one run (npm run bench), written to bench/RESULTS.md with the machine,
// date and commit: each target as a ratio measured in this run, and each figure at three sizes so
// that the tables show how cost grows with work. Loopback only; takes about ten minutes.
//   npm run bench [-- --quick] [-- --soak]
// --quick shortens every timed run (for trying the script, not for figures to quote).
// --soak adds the ten-minute soak (bench/soak.ts) and quotes its summary; --soak-minutes N sets its length.
import { execFileSync } from 'node:child_process';
import { writeFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { measureEnsembleForward, measureForward, measureOfflineScore, measureScoreBatch } from './batch.js';
import { measureDrift } from './drift-report.js';
import { measureDriftOnServer } from './drift-postgres.js';
import { type HttpFigures, measureHttp } from './http.js';
import { describeMachine } from './lib/machine.js';
import { measureExplain } from './explain.js';
import { measureReplicas, replicasTable } from './replicas.js';
import { hasWrk } from './lib/load.js';
import { type WalFigures, measureWal } from './wal.js';

const quick = process.argv.includes('--quick');
const soak = process.argv.includes('--soak') || process.argv.includes('--soak-minutes');
const seconds = quick ? 2 : 5;
const say = (line: string): void => void process.stderr.write(`${line}\n`);
const f0 = (v: number): string => v.toLocaleString('en-GB', { maximumFractionDigits: 0 });
const f2 = (v: number): string => v.toFixed(2);

interface Target {
  measure: string;
  figure: string;
  target: string;
  met: boolean;
}
const targets: Target[] = [];
const sections: string[] = [];

// 1. HTTP
say('HTTP: score against the bare route ...');
const http: HttpFigures[] = [];
for (const [shape, sync, writer] of [['demo', 'normal', 'event-loop'], ['mid', 'normal', 'event-loop'], ['wide', 'normal', 'event-loop'], ['mid', 'full', 'event-loop'], ['mid', 'normal', 'thread']] as const) {
  const f = await measureHttp(shape, sync, { seconds, connections: 32, rounds: quick ? 2 : 5, writer });
  say(`  ${f.shape} sync ${f.sync} writer ${f.writer}: ratio ${f2(f.ratio)}, p99 at 1,000 req/s ${f.fixed.p99Ms} ms`);
  http.push(f);
}
const midNormal = http.find((f) => f.shape === '10-64-64-5' && f.sync === 'normal' && f.writer === 'event-loop') as HttpFigures;
const midFull = http.find((f) => f.shape === '10-64-64-5' && f.sync === 'full') as HttpFigures;
const demo = http.find((f) => f.shape === '10-32-32-5' && f.sync === 'normal' && f.writer === 'event-loop') as HttpFigures;
targets.push(
  { measure: "HTTP: the service's bare route (its plugins and hooks, no scoring) / a bare fastify app, same bytes", figure: f2(demo.bareToFastify), target: '>= 0.85', met: demo.bareToFastify >= 0.85 },
  { measure: 'HTTP POST score on the demo bundle (10-32-32-5 x 5 members, audit log on) / a bare fastify app, same bytes', figure: f2(demo.scoreToFastify), target: '>= 0.5', met: demo.scoreToFastify >= 0.5 },
  { measure: 'HTTP POST score (10-64-64-5 x 5 members, audit log on) / the bare route, same bytes', figure: f2(midNormal.ratio), target: '>= 0.8', met: midNormal.ratio >= 0.8 },
  { measure: 'HTTP POST score p99 at a fixed 1,000 req/s (10-64-64-5 x 5 members)', figure: `${midNormal.fixed.p99Ms} ms`, target: '<= 5 ms', met: midNormal.fixed.p99Ms <= 5 },
  { measure: 'the same ratio with `log.sync: "full"`', figure: f2(midFull.ratio), target: '>= 0.8', met: midFull.ratio >= 0.8 },
  { measure: 'p99 at a fixed 1,000 req/s with `log.sync: "full"`', figure: `${midFull.fixed.p99Ms} ms`, target: '<= 5 ms', met: midFull.fixed.p99Ms <= 5 },
);
sections.push(
  [
    '## HTTP: POST score against a bare route',
    '',
    `${http[0]?.score.tool ?? 'wrk'}, one thread, 32 connections, ${seconds} s per run, on the same machine as the server (loopback). The bare route is`,
    'in the same fastify (same hooks, key check and rate limiter) and answers with the bytes of a real score',
    'answer; the bare fastify app (bench/bare-fastify.ts, a process of its own) answers the same bytes from one',
    `POST route and nothing else. ${http[0]?.rounds.length ?? 0} rounds of fastify, bare and score, back to back; each ratio is the median of the rounds' ratios (score / bare`,
    'listed), and the figures shown are that round\'s. "At 1,000 req/s" holds 8 connections at 1,000 requests a',
    'second (wrk `delay()`) for the same time, three times, each after the bare route held the same way; the',
    'median p99 of each.',
    '',
    '| network | log.sync | log.writer | score req/s | p50 ms | p99 ms | bare req/s | bare p99 ms | score / bare | rounds | fastify req/s | bare / fastify | score / fastify | p99 at 1,000 req/s | bare p99 at 1,000 req/s | failed |',
    '|---|---|---|---:|---:|---:|---:|---:|---:|---|---:|---:|---:|---:|---:|---:|',
    ...http.map((f) => `| ${f.shape} | ${f.sync} | ${f.writer} | ${f0(f.score.requestsPerSecond)} | ${f.score.p50Ms} | ${f.score.p99Ms} | ${f0(f.bare.requestsPerSecond)} | ${f.bare.p99Ms} | ${f2(f.ratio)} | ${f.rounds.map(f2).join(' ')} | ${f0(f.fastify.requestsPerSecond)} | ${f2(f.bareToFastify)} | ${f2(f.scoreToFastify)} | ${f.fixed.p99Ms} ms | ${f.fixedBare.p99Ms} ms | ${f.score.failed + f.bare.failed + f.fixed.failed} |`),
    '',
    'Server CPU time per request answered (user and system, every thread of the server process, from',
    '/proc/<pid>/stat over each run; the median of the rounds). The requests a second above depend also on',
    'whether wrk kept up: on two cores it has one of its own, and the bare fastify app leaves its core idle',
    'part of the time while wrk does not. The CPU ratios compare what each app spends on a request.',
    '',
    '| network | log.sync | log.writer | fastify us | bare us | score us | fastify / bare | fastify / score |',
    '|---|---|---|---:|---:|---:|---:|---:|',
    ...http.map((f) => (f.cpuUs ? `| ${f.shape} | ${f.sync} | ${f.writer} | ${f.cpuUs.fastify.toFixed(1)} | ${f.cpuUs.bare.toFixed(1)} | ${f.cpuUs.score.toFixed(1)} | ${f2(f.cpuUs.fastify / f.cpuUs.bare)} | ${f2(f.cpuUs.fastify / f.cpuUs.score)} |` : `| ${f.shape} | ${f.sync} | ${f.writer} | not measured (no /proc) | | | | |`)),
  ].join('\n'),
);

// 2. Batch scoring and the forward pass
say('forward pass against numpy ...');
const forward = measureForward(['mid', 'wide'], [64, 1024, 8192]);
for (const f of forward.filter((x) => x.batch === 1024)) {
  targets.push({ measure: `forward pass ${f.shape}, batch 1,024, GFLOP/s / numpy (OpenBLAS, one thread)`, figure: f.ratio === null ? 'numpy missing' : f2(f.ratio), target: '>= 0.3', met: f.ratio !== null && f.ratio >= 0.3 });
}
say('ensemble forward passes, members x rows ...');
const ensemble = measureEnsembleForward('mid', [1, 3, 5, 10], [1, 64, 1024]);
say('score-batch and offline score ...');
const batch = [];
const offline = [];
for (const shape of ['mid', 'wide'] as const) {
  batch.push(...(await measureScoreBatch(shape, [10, 100, 1000], quick ? 2 : 5)));
  offline.push(...(await measureOfflineScore(shape, quick ? [1000, 10_000] : [1000, 10_000, 100_000])));
}
sections.push(
  [
    '## Forward pass alone, float64',
    '',
    'GFLOP/s counted as 2 x batch x (sum of weights); numpy is `h @ w + b` then `np.maximum(h, 0)` per layer',
    '(bench/numpy-forward.py, Debian python3-numpy on OpenBLAS, OPENBLAS_NUM_THREADS=1).',
    '',
    '| network | batch | plumbline GFLOP/s | numpy GFLOP/s | ratio |',
    '|---|---:|---:|---:|---:|',
    ...forward.map((f) => `| ${f.shape} | ${f0(f.batch)} | ${f2(f.gflops)} | ${f.numpyGflops === null ? '-' : f2(f.numpyGflops)} | ${f.ratio === null ? '-' : f2(f.ratio)} |`),
    '',
    '## Ensemble forward passes, members x rows',
    '',
    'An answer runs the forward pass of every member of the bundle (train makes five by default), so',
    'the work is members x rows. Each row of the table runs that many 10-64-64-5 networks over one batch.',
    '',
    '| network | members | rows | microseconds | vectors/s |',
    '|---|---:|---:|---:|---:|',
    ...ensemble.map((e) => `| ${e.shape} | ${e.members} | ${f0(e.rows)} | ${e.microseconds.toFixed(1)} | ${f0(e.vectorsPerSecond)} |`),
    '',
    '## Batch scoring, vectors/s',
    '',
    'POST score-batch: 4 connections, every answer logged (one row per vector). Offline `plumbline score`:',
    'a CSV file in, JSON lines out, batch size 512.',
    '',
    '| network | path | size | vectors/s |',
    '|---|---|---:|---:|',
    ...batch.map((t) => `| ${t.shape} | score-batch | ${f0(t.size)} items | ${f0(t.vectorsPerSecond)} |`),
    ...offline.map((t) => `| ${t.shape} | offline score | ${f0(t.size)} rows | ${f0(t.vectorsPerSecond)} |`),
  ].join('\n'),
);

// Explanations (issue 18)
say('explaining one demo vector ...');
const explained = await measureExplain(quick);
for (const e of explained) {
  targets.push({ measure: `explain one vector of the demo bundle, ${e.shot}`, figure: `${e.explainUs.toFixed(0)} us`, target: '< 1,000 us', met: e.explainUs < 1000 });
}
sections.push(
  [
    '## Explaining one vector',
    '',
    '`"explain": true` on the demo bundle (10-32-32-5, five members): integrated gradients of the answered',
    'label (64 steps) and the nearest label change of each feature, against scoring the same vector.',
    `Median of ${explained[0]?.rounds ?? 0} rounds; "pieces" is where the path was cut at relu kinks, "nodes" the Gauss-Legendre nodes.`,
    '',
    '| shot | in domain | explain us | integrated gradients us | nearest changes us | score us | pieces | nodes |',
    '|---|---|---:|---:|---:|---:|---:|---:|',
    ...explained.map((e) => `| ${e.shot} | ${e.inDomain ? 'yes' : 'no'} | ${e.explainUs.toFixed(0)} | ${e.integratedGradientsUs.toFixed(0)} | ${e.nearestChangesUs.toFixed(0)} | ${e.scoreUs.toFixed(1)} | ${e.breakpoints + 1} | ${e.nodes} |`),
  ].join('\n'),
);

// 3. Drift report
say('drift report ...');
const drift = [];
for (const n of quick ? [10_000, 100_000] : [10_000, 100_000, 1_000_000]) drift.push(await measureDrift(n));
for (const d of drift.filter((x) => x.rows >= 100_000)) {
  targets.push({ measure: `drift report over ${f0(d.rows)} logged rows / bare better-sqlite3 iteration`, figure: `${f2(d.ratio)}x`, target: '<= 3x', met: d.ratio <= 3 });
}
const million = drift.find((d) => d.rows === 1_000_000);
if (million) targets.push({ measure: 'drift report peak RSS at 1,000,000 rows', figure: `${f0(million.peakRssMb)} MB`, target: '< 300 MB', met: million.peakRssMb < 300 });
sections.push(
  [
    '## Drift report over logged rows',
    '',
    "The demo traffic's answers logged over one day; the report (PSI, Kolmogorov-Smirnov, rates) in a",
    'process of its own, peak RSS from getrusage. The bare iteration reads the same rows and columns',
    'with better-sqlite3 and decodes the feature blobs, nothing more.',
    '',
    '| rows | report ms | bare ms | ratio | peak RSS MB |',
    '|---:|---:|---:|---:|---:|',
    ...drift.map((d) => `| ${f0(d.rows)} | ${f0(d.reportMs)} | ${f0(d.bareMs)} | ${f2(d.ratio)} | ${f0(d.peakRssMb)} |`),
  ].join('\n'),
);

say('drift report on PostgreSQL ...');
const serverDrift = await measureDriftOnServer(quick ? 100_000 : 1_000_000);
if (!('skipped' in serverDrift)) {
  targets.push(
    { measure: `drift report over ${f0(serverDrift.rows)} rows in PostgreSQL / bare server-side-cursor scan from Node`, figure: `${f2(serverDrift.ratio)}x`, target: '<= 3x', met: serverDrift.ratio <= 3 },
    { measure: `drift report peak RSS at ${f0(serverDrift.rows)} rows in PostgreSQL`, figure: `${f0(serverDrift.peakRssMb)} MB`, target: '< 300 MB', met: serverDrift.peakRssMb < 300 },
  );
}
sections.push(
  [
    '## Drift report over rows in PostgreSQL',
    '',
    "The demo traffic's answers, repeated over one day, in a throwaway PostgreSQL 15 (bench/drift-postgres.ts).",
    'The report reads them through a server-side cursor, 5,000 rows a FETCH; the bare scan runs the same query',
    'through the same cursor from Node and does nothing with the rows. Each in a process of its own; the bare',
    'scan is the better of one run before and one after the report.',
    '',
    ...('skipped' in serverDrift
      ? [`Skipped: ${serverDrift.skipped}.`]
      : ['| rows | report ms | bare scan ms | ratio | peak RSS MB |', '|---:|---:|---:|---:|---:|', `| ${f0(serverDrift.rows)} | ${f0(serverDrift.reportMs)} | ${f0(serverDrift.scanMs)} | ${f2(serverDrift.ratio)} | ${f0(serverDrift.peakRssMb)} |`]),
  ].join('\n'),
);

// 4. The write-ahead log under sustained load
say('WAL under sustained load ...');
const wal: WalFigures[] = [];
const walSeconds = quick ? 5 : 30;
for (const writer of ['event-loop', 'thread'] as const) {
  for (const route of ['score', 'score-batch'] as const) {
    const f = await measureWal({ route, seconds: walSeconds, connections: 4, items: 100, writer });
    say(`  ${route} log.writer ${writer}: largest WAL ${f2(f.walMaxBytes / 2 ** 20)} MiB`);
    wal.push(f);
  }
}
const walWorst = wal.reduce((a, b) => (b.walMaxBytes > a.walMaxBytes ? b : a));
targets.push({ measure: `largest -wal file under ${walSeconds} s of score and of score-batch at full speed, each writer`, figure: `${f2(walWorst.walMaxBytes / 2 ** 20)} MiB`, target: `<= ${f0(walWorst.boundBytes / 2 ** 20)} MiB (log.wal_max_bytes)`, met: walWorst.walMaxBytes <= walWorst.boundBytes });
sections.push(
  [
    '## The write-ahead log under sustained load',
    '',
    `${wal[0]?.load.tool ?? 'wrk'}, one thread, 4 keep-alive connections, as fast as the service answers, ${walSeconds} s per route; score-batch`,
    `carries ${wal.find((f) => f.route === 'score-batch')?.items ?? 100} items a request. The size of the database's -wal file is sampled every 50 ms from the`,
    'benchmark process; the largest is shown against `log.wal_max_bytes` (default). Rows from the service\'s own',
    'counter. Before issue 19 the -wal file grew without bound under such load (1,220 MiB after 20 s of score).',
    '',
    '| route | log.writer | req/s | rows | largest WAL MiB | bound MiB | database MiB | failed |',
    '|---|---|---:|---:|---:|---:|---:|---:|',
    ...wal.map((f) => `| ${f.route}${f.route === 'score-batch' ? ` x ${f.items}` : ''} | ${f.writer} | ${f0(f.load.requestsPerSecond)} | ${f0(f.rows)} | ${f2(f.walMaxBytes / 2 ** 20)} | ${f0(f.boundBytes / 2 ** 20)} | ${f2(f.dbBytes / 2 ** 20)} | ${f.load.failed} |`),
  ].join('\n'),
);

const REPLICAS_INTRO = [
  '## Replicas on one PostgreSQL against one on SQLite',
  '',
  'POST score with the demo bundle, the audit log on, `limits.requests_per_minute` 0 (no limit), as fast as the',
  'load generator goes. One replica on a SQLite file, then 1, 2 and 3 replicas (each its own process) on one',
  'database of a throwaway PostgreSQL 15 on this machine (fsync off, synchronous_commit on), side by side in one',
  'run (bench/replicas.ts). One load generator per replica at once, 32 connections split between them; the',
  'answers per second are their sum. Server processes, PostgreSQL and the load generators share this',
  "machine's cores, so these figures show what one machine gives, not what N machines would: more replicas",
  'here only split the same CPU and add contention for the chain head, which every commit locks.',
  '',
];
say('replicas on PostgreSQL ...');
const replicas = await measureReplicas({ seconds: quick ? 2 : 10, connections: 32 });
sections.push(['skipped' in replicas ? [...REPLICAS_INTRO, `Skipped: ${replicas.skipped}.`] : [...REPLICAS_INTRO, ...replicasTable(replicas)]].flat().join('\n'));

if (soak) {
  say('soak ...');
  const i = process.argv.indexOf('--soak-minutes');
  const minutes = i > 0 ? ['--minutes', String(Number(process.argv[i + 1]))] : [];
  const out = execFileSync(process.execPath, ['--import', 'tsx', fileURLToPath(new URL('soak.ts', import.meta.url)), ...minutes], { encoding: 'utf8' });
  sections.push(['## Soak', '', '```', out.trim(), '```'].join('\n'));
}

const m = describeMachine();
const doc = [
  '# Benchmark results',
  '',
  `Written by \`npm run bench\`${quick ? ' --quick (short runs: not figures to quote)' : ''}. Machine: ${m.cpu}, ${m.cores} cores, ${m.memoryGb} GB, ${m.os}, Node ${m.node}.`,
  `Date ${m.date}, commit ${m.commit}${m.dirty ? ' (with uncommitted changes)' : ''}. Load generator: ${hasWrk() ? 'wrk' : 'autocannon'}, on the same machine as the server.`,
  '',
  '## Targets',
  '',
  '| measure | this run | target | met |',
  '|---|---:|---:|---|',
  ...targets.map((t) => `| ${t.measure} | ${t.figure} | ${t.target} | ${t.met ? 'yes' : 'no'} |`),
  '',
  ...sections.flatMap((s) => [s, '']),
].join('\n');
const file = fileURLToPath(new URL('RESULTS.md', import.meta.url));
writeFileSync(file, doc);
say(`written ${file}`);
for (const t of targets) say(`  ${t.met ? 'met    ' : 'not met'} ${t.measure}: ${t.figure} (target ${t.target})`);
