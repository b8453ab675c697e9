import { spawnSync } from 'node:child_process';
import { createHash } from 'node:crypto';
import { readFileSync, writeFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { afterAll, describe, expect, it } from 'vitest';
import { importAction } from '../../src/cli/actions/import.js';
import type { CliIo } from '../../src/cli/io.js';
import { createScorer } from '../../src/bundle/scorer.js';
import { readBundle } from '../../src/bundle/verify.js';
import { tempDir } from '../helpers/datasets.js';
import { sink } from '../helpers/sink.js';

// PyTorch's probabilities for the exported graphs: test/fixtures/make-onnx.py.
const ONNX = fileURLToPath(new URL('../fixtures/onnx/', import.meta.url));
const DATA = fileURLToPath(new URL('../fixtures/datasets/', import.meta.url));
const expected = JSON.parse(readFileSync(`${ONNX}expected.json`, 'utf8')) as {
  models: Array<{ file: string; classes: string[]; preprocess: { mean: number[]; scale: number[] } | null; inside: { rows: number[][]; probabilities: number[][] }; far: { rows: number[][]; probabilities: number[][] } }>;
};
const fixture = (file: string) => expected.models.find((m) => m.file === file)!;
const tmp = tempDir();
afterAll(() => tmp.remove());
const io = (): CliIo => ({ stdout: sink(), stderr: sink(), interactive: false });
const base = { label: 'label', version: '1', tolerance: 0.1, reviewMargin: 0.2, detectors: ['input_mahalanobis', 'feature_mahalanobis', 'energy'] as const, inDomainRate: 0.99, keepWeak: false, seed: 1, createdAt: new Date('2026-12-01T00:00:00Z') };

async function scoredAgainstTorch(out: string, rows: number[][]) {
  const loaded = await readBundle(out);
  return createScorer(loaded).scoreRows(Float64Array.from(rows.flat()), rows.length).map((o) => ({ p: loaded.file.classes.map((c) => o.probabilities[c] as number), inDomain: o.domain.in_domain }));
}

describe('plumbline import --onnx', () => {
  it('seals the Wine network with --preprocess; served probabilities match PyTorch within 1e-5', async () => {
    const f = fixture('wine-relu-opset17.onnx');
    const pre = tmp.file('wine-pre.json', JSON.stringify(f.preprocess));
    const out = tmp.file('wine.bundle.json');
    const { bundle } = await importAction({ ...base, onnx: `${ONNX}wine-relu-opset17.onnx`, data: `${DATA}wine.csv`, preprocess: pre, name: 'wine-press', out }, io());
    expect(bundle.classes).toEqual(f.classes);
    expect(bundle.calibration).toEqual({ temperature: 1, fit: 'not_fitted' });
    expect(bundle.format).toBe('plumbline-bundle/2');
    expect(bundle.training.source).toEqual({
      kind: 'onnx',
      onnx_sha256: createHash('sha256').update(readFileSync(`${ONNX}wine-relu-opset17.onnx`)).digest('hex'),
      onnx_file: 'wine-relu-opset17.onnx',
      producer: 'pytorch 1.13.0',
      opset: 17,
      data_sha256: createHash('sha256').update(readFileSync(`${DATA}wine.csv`)).digest('hex'),
      label_column: 'label',
    });
    const inside = await scoredAgainstTorch(out, f.inside.rows);
    const worst = Math.max(...inside.flatMap((a, r) => a.p.map((v, k) => Math.abs(v - (f.inside.probabilities[r]![k] as number)))));
    expect(worst).toBeLessThan(1e-5);
    // The lesson in numbers: far outside the data the network is as sure as ever, and the flag says so.
    const far = await scoredAgainstTorch(out, f.far.rows);
    expect(Math.min(...f.far.probabilities.map((p) => Math.max(...p)))).toBeGreaterThan(0.99);
    expect(far.every((a) => !a.inDomain)).toBe(true);
    expect(inside.filter((a) => a.inDomain).length).toBeGreaterThanOrEqual(36);
  });

  it('fits the temperature and calibrates the flag on labelled --calibrate-on rows', async () => {
    // 100 rows of the data as the held-out file (invented split of a public dataset; the point is the wiring)
    const lines = readFileSync(`${DATA}breast-cancer.csv`, 'utf8').trim().split('\n');
    const cal = tmp.file('cancer-cal.csv', `${[lines[0], ...lines.slice(1, 101)].join('\n')}\n`);
    const out = tmp.file('cancer.bundle.json');
    const { bundle } = await importAction({ ...base, onnx: `${ONNX}cancer-tanh-bn-opset13.onnx`, data: `${DATA}breast-cancer.csv`, calibrateOn: cal, name: 'cancer', out }, io());
    expect(bundle.calibration.temperature).not.toBe(1);
    expect(bundle.domain.held_out).toMatchObject({ source: 'calibrate-on', rows: 100 });
    expect(bundle.training.options).toMatchObject({ preprocess: 'in graph', onnx_ending: 'log_softmax' });
    expect(bundle.training.rows).toEqual({ total: 669, folds: 1, held_out: 100 });
    expect(bundle.members).toHaveLength(1);
    expect(bundle.calibration.fit).toBe('fitted');
  });

  it('says when the graph and the data do not fit together, naming the flags to look at', async () => {
    const run = (o: Partial<Parameters<typeof importAction>[0]>) => importAction({ ...base, onnx: `${ONNX}digits-mix-opset17.onnx`, data: `${DATA}digits.csv`, name: 'digits', out: tmp.file('d.bundle.json'), ...o }, io());
    await expect(run({ features: ['pixel_0_0', 'pixel_0_1'] })).rejects.toThrow(/do not fit together: the graph takes 64 features a row, but 2 are named .*\(see --features and --classes\)/);
    await expect(run({ classes: ['0', '1', '2', '3', '4', '5', '6', '7', '8', '9', 'ten'] })).rejects.toThrow(/the graph gives 10 class scores, but 11 classes are named/);
    await expect(run({ classes: ['0', '1'] })).rejects.toThrow(/holds labels "2", "3", "4", "5", "6" \.\.\., not among the classes 0, 1 \(--classes\)/);
  });

  it('refuses an unsupported graph from the command line with exit 2 and the reason', () => {
    const run = spawnSync(process.execPath, ['--import', 'tsx', fileURLToPath(new URL('../../src/cli/main.ts', import.meta.url)), 'import', '--onnx', `${ONNX}refused-residual.onnx`, '--data', `${DATA}wine.csv`, '--label', 'label', '--name', 'x', '--out', tmp.file('x.bundle.json')], { encoding: 'utf8' });
    expect(run.status).toBe(2);
    expect(run.stderr).toMatch(/^plumbline: .*refused-residual\.onnx: the tensor "x" feeds 2 nodes/);
    // the verb was renamed, not aliased
    const old = spawnSync(process.execPath, ['--import', 'tsx', fileURLToPath(new URL('../../src/cli/main.ts', import.meta.url)), 'bundle', '--onnx', `${ONNX}wine-relu-opset17.onnx`], { encoding: 'utf8' });
    expect(old.status).not.toBe(0);
    expect(old.stderr).toMatch(/unknown command 'bundle'/);
  });

  it('writes a preprocess file it was given only when it is well-formed', async () => {
    const bad = tmp.file('bad-pre.json', JSON.stringify({ mean: [1, 2], scale: [1, 0] }));
    await expect(importAction({ ...base, onnx: `${ONNX}wine-relu-opset17.onnx`, data: `${DATA}wine.csv`, preprocess: bad, name: 'w', out: tmp.file('w.bundle.json') }, io())).rejects.toThrow(/--preprocess .*bad-pre\.json: scale\.1 .*positive scales/);
    writeFileSync(bad, JSON.stringify({ mean: [1, 2], scale: [1, 2] }));
    await expect(importAction({ ...base, onnx: `${ONNX}wine-relu-opset17.onnx`, data: `${DATA}wine.csv`, preprocess: bad, name: 'w', out: tmp.file('w.bundle.json') }, io())).rejects.toThrow(/--preprocess gives 2 means and 2 scales; the graph takes 13 values a row/);
  });
});
