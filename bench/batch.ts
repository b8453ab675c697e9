// Batch scoring: vectors/s through POST score-batch and through the offline `plumbline score`,
// the forward pass alone in GFLOP/s against a numpy (OpenBLAS) matmul chain on one thread, and the
// ensemble's forward passes, members x rows.
//   npx tsx bench/batch.ts
import { execFileSync } from 'node:child_process';
import { mkdtempSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { scoreAction } from '../src/cli/actions/score.js';
import type { Network } from '../src/core/network.js';
import { createFastForwardPass } from '../src/core/wasm/forward-pass.js';
import { createRng } from '../src/core/rng.js';
import { sink } from '../test/helpers/sink.js';
import { SHAPES, type ShapeName, benchModels, shapeLabel, vector } from './lib/bundles.js';
import { startChild } from './lib/child.js';
import { load } from './lib/load.js';

export interface Throughput {
  shape: string;
  size: number;
  vectorsPerSecond: number;
}

export async function measureScoreBatch(shape: ShapeName, sizes: number[], seconds: number): Promise<Throughput[]> {
  const dir = mkdtempSync(join(tmpdir(), 'plumbline-bench-batch-'));
  try {
    const models = await benchModels(dir, shape);
    const config = { limits: { requests_per_minute: 10_000_000, batch_items: 10_000, body_bytes: 64 << 20 }, log: { queue_rows: 1_000_000 } };
    const server = await startChild<{ url: string }>('http-server.ts', [models.dir, join(dir, 'bench.db'), models.model, JSON.stringify(vector(shape)), JSON.stringify(config)]);
    try {
      const out: Throughput[] = [];
      for (const size of sizes) {
        const body = JSON.stringify({ items: Array.from({ length: size }, () => ({ features: vector(shape) })) });
        const spec = { url: `${server.info.url}/v1/models/${models.model}/score-batch`, body, connections: 4, seconds };
        await load({ ...spec, seconds: 2 });
        const r = await load(spec);
        if (r.failed > 0) throw new Error(`score-batch of ${size}: ${r.failed} requests failed`);
        out.push({ shape: shapeLabel(shape), size, vectorsPerSecond: r.requestsPerSecond * size });
      }
      return out;
    } finally {
      await server.stop();
    }
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
}

export async function measureOfflineScore(shape: ShapeName, sizes: number[]): Promise<Throughput[]> {
  const dir = mkdtempSync(join(tmpdir(), 'plumbline-bench-score-'));
  try {
    const models = await benchModels(dir, shape);
    const bundle = join(models.dir, readdirSync(models.dir)[0] as string);
    const names = shape === 'demo' ? ['melt_temp_c', 'mould_temp_c', 'injection_pressure_bar', 'hold_pressure_bar', 'hold_time_s', 'cooling_time_s', 'screw_speed_rpm', 'cushion_mm', 'cycle_time_s', 'shot_weight_g'] : Array.from({ length: SHAPES[shape].features }, (_, j) => `f${j}`);
    const row = vector(shape).join(',');
    const out: Throughput[] = [];
    for (const size of sizes) {
      const data = join(dir, `rows-${size}.csv`);
      writeFileSync(data, `${names.join(',')}\n${`${row}\n`.repeat(size)}`);
      const t = performance.now();
      const summary = await scoreAction({ bundle, data, out: join(dir, 'out.jsonl'), batchSize: 512 }, { stdout: sink(), stderr: sink(), interactive: false });
      const seconds = (performance.now() - t) / 1000;
      if (summary.scored !== size) throw new Error(`scored ${summary.scored} of ${size}`);
      out.push({ shape: shapeLabel(shape), size, vectorsPerSecond: size / seconds });
    }
    return out;
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
}

export interface ForwardFigure {
  shape: string;
  batch: number;
  gflops: number;
  numpyGflops: number | null;
  ratio: number | null;
}

function randomNetwork(shape: number[], seed: number): Network {
  const rng = createRng(seed);
  return {
    layers: shape.slice(0, -1).map((a, i) => ({
      inputs: a,
      outputs: shape[i + 1] as number,
      activation: i < shape.length - 2 ? 'relu' : 'identity',
      alpha: 0,
      weights: Float64Array.from({ length: a * (shape[i + 1] as number) }, () => rng.next() - 0.5),
      bias: Float64Array.from({ length: shape[i + 1] as number }, () => rng.next() - 0.5),
    })),
  };
}

/** Calls per second of fn, after a warm-up, over about a second. */
function callsPerSecond(fn: () => void): number {
  for (let i = 0; i < 5; i++) fn();
  let n = 0;
  const t = performance.now();
  while (performance.now() - t < 1000) {
    fn();
    n++;
  }
  return n / ((performance.now() - t) / 1000);
}

function ourForward(shape: number[], batch: number): number {
  const net = randomNetwork(shape, 1);
  const rng = createRng(2);
  const x = Float64Array.from({ length: batch * (shape[0] as number) }, () => rng.next());
  const pass = createFastForwardPass(net, batch);
  const flops = 2 * batch * shape.slice(0, -1).reduce((s, a, i) => s + a * (shape[i + 1] as number), 0);
  return (flops * callsPerSecond(() => pass.run(x, batch))) / 1e9;
}

export interface EnsembleFigure {
  shape: string;
  members: number;
  rows: number;
  /** Microseconds for every member's forward pass over the rows. */
  microseconds: number;
  vectorsPerSecond: number;
}

/**
 * The ensemble's cost: an answer runs every member's forward pass, so the work is members x rows.
 * Each figure runs M networks of the shape over a batch of the rows, as the scorer does.
 */
export function measureEnsembleForward(shape: ShapeName, members: number[], rows: number[]): EnsembleFigure[] {
  const label = shapeLabel(shape);
  const dims = label.split('-').map(Number);
  return members.flatMap((m) =>
    rows.map((batch) => {
      const passes = Array.from({ length: m }, (_, i) => createFastForwardPass(randomNetwork(dims, 10 + i), batch));
      const rng = createRng(3);
      const x = Float64Array.from({ length: batch * (dims[0] as number) }, () => rng.next());
      const perSecond = callsPerSecond(() => {
        for (const p of passes) p.run(x, batch);
      });
      return { shape: label, members: m, rows: batch, microseconds: 1e6 / perSecond, vectorsPerSecond: perSecond * batch };
    }),
  );
}

function numpyForward(shapes: string[], batches: number[]): Map<string, number> | null {
  const env: NodeJS.ProcessEnv = { ...process.env, OPENBLAS_NUM_THREADS: '1', OMP_NUM_THREADS: '1' };
  delete env.OPENBLAS_CORETYPE;
  delete env.OPENBLAS_L2_SIZE;
  try {
    const out = execFileSync('/usr/bin/python3', [fileURLToPath(new URL('numpy-forward.py', import.meta.url)), ...shapes, ...batches.map(String)], { encoding: 'utf8', env });
    return new Map(out.trim().split('\n').map((l) => JSON.parse(l) as { shape: string; batch: number; gflops: number }).map((r) => [`${r.shape}@${r.batch}`, r.gflops]));
  } catch {
    return null;
  }
}

export function measureForward(shapes: ShapeName[], batches: number[]): ForwardFigure[] {
  const labels = shapes.map(shapeLabel);
  const ref = numpyForward(labels, batches);
  return labels.flatMap((label) =>
    batches.map((batch) => {
      const gflops = ourForward(label.split('-').map(Number), batch);
      const numpyGflops = ref?.get(`${label}@${batch}`) ?? null;
      return { shape: label, batch, gflops, numpyGflops, ratio: numpyGflops ? gflops / numpyGflops : null };
    }),
  );
}

if (process.argv[1]?.endsWith('batch.ts')) {
  for (const f of measureForward(['mid', 'wide'], [64, 1024, 8192])) console.log(`forward ${f.shape} batch ${f.batch}: ${f.gflops.toFixed(2)} GFLOP/s, numpy ${f.numpyGflops?.toFixed(2)}, ratio ${f.ratio?.toFixed(2)}`);
  for (const f of measureEnsembleForward('mid', [1, 5], [1, 64, 1024])) console.log(`ensemble ${f.shape} ${f.members} members x ${f.rows} rows: ${f.microseconds.toFixed(1)} us, ${f.vectorsPerSecond.toFixed(0)} vectors/s`);
  for (const shape of ['mid', 'wide'] as const) {
    for (const t of await measureScoreBatch(shape, [10, 100, 1000], 5)) console.log(`score-batch ${t.shape} x${t.size}: ${t.vectorsPerSecond.toFixed(0)} vectors/s`);
    for (const t of await measureOfflineScore(shape, [1000, 10_000, 100_000])) console.log(`offline score ${t.shape} ${t.size} rows: ${t.vectorsPerSecond.toFixed(0)} vectors/s`);
  }
}
