// HTTP: POST score with the audit log on, against a bare route in the same fastify answering with
// the same bytes, and both against a bare fastify app in a process of its own answering the same
// bytes (bench/bare-fastify.ts); same load generator and connections. Also p99 at a fixed 1,000
// requests/s.
//   npx tsx bench/http.ts [--seconds 5] [--connections 32] [--rounds 5]
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { type ShapeName, benchModels, shapeLabel, vector } from './lib/bundles.js';
import { startChild } from './lib/child.js';
import { type LoadResult, load } from './lib/load.js';

export interface HttpFigures {
  shape: string;
  sync: 'normal' | 'full';
  writer: 'event-loop' | 'thread';
  score: LoadResult;
  bare: LoadResult;
  /** A bare fastify app answering the same bytes (bench/bare-fastify.ts). */
  fastify: LoadResult;
  /** score / bare route, the median round's. */
  ratio: number;
  /** The service's bare route / bare fastify: what the service's plugins and hooks cost. */
  bareToFastify: number;
  /** score / bare fastify. */
  scoreToFastify: number;
  /** POST score held at 1,000 requests a second. */
  fixed: LoadResult;
  /** The bare route held at the same rate. */
  fixedBare: LoadResult;
  /** Each round's score / bare ratio; `ratio` is their median, and score and bare are that round's runs. */
  rounds: number[];
  /** Each round's bare / fastify and score / fastify. */
  fastifyRounds: Array<{ bare: number; score: number }>;
  /**
   * Server CPU time (user and system, all threads) per request, µs, the median of the rounds for
   * each app; null without /proc. With a load generator that keeps up, the ratios of requests a
   * second come to the inverse ratios of these; on a machine where it does not (two cores, one of
   * them wrk's), these still compare what each app spends on a request.
   */
  cpuUs: { fastify: number; bare: number; score: number } | null;
}

export async function measureHttp(shape: ShapeName, sync: 'normal' | 'full', o: { seconds: number; connections: number; rounds: number; writer?: 'event-loop' | 'thread' }): Promise<HttpFigures> {
  const dir = mkdtempSync(join(tmpdir(), 'plumbline-bench-http-'));
  try {
    const models = await benchModels(dir, shape);
    const features = vector(shape);
    // The limit is raised, not removed, so that both routes pay for the rate limiter as in service.
    const writer = o.writer ?? 'event-loop';
    const config = { log: { sync, writer }, limits: { requests_per_minute: 10_000_000 } };
    const server = await startChild<{ url: string; bytes: number }>('http-server.ts', [models.dir, join(dir, 'bench.db'), models.model, JSON.stringify(features), JSON.stringify(config)]);
    const serverPid = server.child.pid;
    try {
      const answerFile = join(dir, 'answer.json');
      writeFileSync(answerFile, Buffer.from(await (await fetch(`${server.info.url}/bench/answer`)).arrayBuffer()));
      const yardstick = await startChild<{ url: string; bytes: number }>('bare-fastify.ts', [answerFile]);
      try {
        const body = JSON.stringify({ features, tags: { line: '3', station: 'moulding-3' } });
        const score = { url: `${server.info.url}/v1/models/${models.model}/score`, body, connections: o.connections, seconds: o.seconds, ...(serverPid ? { serverPid } : {}) };
        const bare = { ...score, url: `${server.info.url}/bench/bare` };
        const fastifyPid = yardstick.child.pid;
        const fastify = { url: `${yardstick.info.url}/bare`, body, connections: o.connections, seconds: o.seconds, ...(fastifyPid ? { serverPid: fastifyPid } : {}) };
        await load({ ...fastify, seconds: 2 });
        await load({ ...score, seconds: 2 });
        await load({ ...bare, seconds: 2 });
        // Rounds of bare fastify, the bare route and score, back to back; each ratio is the median of
        // the rounds' ratios, so that the machine's slow drifts (a shared host) fall on both sides.
        const rounds: Array<{ fastify: LoadResult; bare: LoadResult; score: LoadResult }> = [];
        for (let round = 0; round < o.rounds; round++) rounds.push({ fastify: await load(fastify), bare: await load(bare), score: await load(score) });
        const median = <T>(xs: T[], key: (x: T) => number): T => [...xs].sort((a, b) => key(a) - key(b))[Math.floor(xs.length / 2)] as T;
        const mid = median(rounds, (r) => r.score.requestsPerSecond / r.bare.requestsPerSecond);
        const midFastify = (key: 'bare' | 'score'): number => {
          const r = median(rounds, (x) => x[key].requestsPerSecond / x.fastify.requestsPerSecond);
          return r[key].requestsPerSecond / r.fastify.requestsPerSecond;
        };
        // Held at 1,000 requests a second, three times; the median p99 of the three.
        // The bare route is held at the same rate between them: the floor this machine sets.
        const held: LoadResult[] = [];
        const heldBare: LoadResult[] = [];
        for (let i = 0; i < 3; i++) {
          heldBare.push(await load({ ...bare, connections: 8, rate: 1000 }));
          held.push(await load({ ...score, connections: 8, rate: 1000 }));
        }
        const fixed = median(held, (r) => r.p99Ms);
        const fixedBare = median(heldBare, (r) => r.p99Ms);
        const medianCpu = (key: 'fastify' | 'bare' | 'score'): number | null => {
          const xs = rounds.map((r) => r[key].serverCpuUs);
          return xs.every((x): x is number => x !== null) ? median(xs, (x) => x) : null;
        };
        const cpu = { fastify: medianCpu('fastify'), bare: medianCpu('bare'), score: medianCpu('score') };
        const s = mid.score;
        const b = mid.bare;
        return {
          shape: shapeLabel(shape),
          sync,
          writer,
          score: s,
          bare: b,
          fastify: mid.fastify,
          ratio: s.requestsPerSecond / b.requestsPerSecond,
          bareToFastify: midFastify('bare'),
          scoreToFastify: midFastify('score'),
          fixed,
          fixedBare,
          rounds: rounds.map((r) => r.score.requestsPerSecond / r.bare.requestsPerSecond),
          fastifyRounds: rounds.map((r) => ({ bare: r.bare.requestsPerSecond / r.fastify.requestsPerSecond, score: r.score.requestsPerSecond / r.fastify.requestsPerSecond })),
          cpuUs: cpu.fastify !== null && cpu.bare !== null && cpu.score !== null ? { fastify: cpu.fastify, bare: cpu.bare, score: cpu.score } : null,
        };
      } finally {
        await yardstick.stop();
      }
    } finally {
      await server.stop();
    }
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
}

if (process.argv[1]?.endsWith('http.ts')) {
  const arg = (name: string, fallback: number): number => {
    const i = process.argv.indexOf(`--${name}`);
    return i > 0 ? Number(process.argv[i + 1]) : fallback;
  };
  for (const [shape, sync] of [['demo', 'normal'], ['mid', 'normal'], ['mid', 'full'], ['wide', 'normal']] as const) {
    const f = await measureHttp(shape, sync, { seconds: arg('seconds', 5), connections: arg('connections', 32), rounds: arg('rounds', 5) });
    console.log(
      `${f.shape} sync ${f.sync}: score ${f.score.requestsPerSecond.toFixed(0)} req/s (p50 ${f.score.p50Ms} ms, p99 ${f.score.p99Ms} ms), bare ${f.bare.requestsPerSecond.toFixed(0)} req/s, bare fastify ${f.fastify.requestsPerSecond.toFixed(0)} req/s; score/bare ${f.ratio.toFixed(2)}, bare/fastify ${f.bareToFastify.toFixed(2)}, score/fastify ${f.scoreToFastify.toFixed(2)}; server CPU per request ${f.cpuUs ? `fastify ${f.cpuUs.fastify.toFixed(1)} us, bare ${f.cpuUs.bare.toFixed(1)} us, score ${f.cpuUs.score.toFixed(1)} us` : 'not measured'}; at 1,000 req/s p99 ${f.fixed.p99Ms} ms; failed ${f.score.failed + f.bare.failed + f.fixed.failed} (${f.score.tool})`,
    );
  }
}
