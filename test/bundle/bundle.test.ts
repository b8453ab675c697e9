import { readFileSync } from 'node:fs';
import { afterAll, describe, expect, it } from 'vitest';
import { canonicalJson, sha256Hex } from '../../src/bundle/canonical-json.js';
import { decodeFloat32, encodeFloat32 } from '../../src/bundle/float32-codec.js';
import type { BundleFile } from '../../src/bundle/schema.js';
import { createScorer } from '../../src/bundle/scorer.js';
import { BundleError, parseBundle, readBundle, sealBundle } from '../../src/bundle/verify.js';
import { serializeBundle, writeBundle } from '../../src/bundle/write.js';
import { forward } from '../../src/core/network.js';
import { softmax } from '../../src/core/softmax.js';
import { standardize } from '../../src/core/standardize.js';
import { irisBundle } from '../helpers/bundles.js';
import { tempDir } from '../helpers/datasets.js';

const trained = irisBundle();
const text = serializeBundle(trained.bundle);
const tmp = tempDir();
afterAll(() => tmp.remove());

/** A copy of the bundle changed by `edit` and sealed again, so that only the edit is wrong. */
function resealed(edit: (b: BundleFile) => void): string {
  const copy = JSON.parse(text) as BundleFile;
  edit(copy);
  const { sha256: _, ...body } = copy;
  return serializeBundle(sealBundle(body));
}

function problemsOf(fn: () => unknown): BundleError {
  try {
    fn();
  } catch (err) {
    if (err instanceof BundleError) return err;
    throw err;
  }
  throw new Error('expected a BundleError');
}

describe('bundle file', () => {
  it('round-trips: written, read back and verified, it scores as the mean of its members\' calibrated softmax', async () => {
    const path = tmp.file('iris.bundle.json');
    await writeBundle(path, trained.bundle);
    const loaded = await readBundle(path);
    expect(loaded.file).toEqual(trained.bundle);
    expect(loaded.members).toHaveLength(5);
    const x = Float64Array.of(5.1, 3.5, 1.4, 0.2, 6.7, 3.0, 5.2, 2.3);
    const scored = createScorer(loaded).scoreRows(x, 2);
    const z = standardize(loaded.file.preprocess, x, 2);
    const expected = [0, 1, 2].map((k) => loaded.members.reduce((s, net) => s + softmax(forward(net, z, 2).logits.subarray(0, 3), loaded.file.calibration.temperature)[k]!, 0) / 5);
    loaded.file.classes.forEach((c, k) => expect(scored[0]!.probabilities[c]).toBeCloseTo(expected[k]!, 15));
    expect(scored[0]!.label).toBe('setosa');
    expect(scored[1]!.label).toBe('virginica');
  });

  it('seals the sha256 of the canonical JSON of everything but the hash', () => {
    const { sha256, ...body } = trained.bundle;
    expect(sha256).toBe(sha256Hex(canonicalJson(body)));
  });

  it('stores weights as little-endian float32 that decode to what the network holds', () => {
    const layer = trained.bundle.members[0]!.layers[0]!;
    const bytes = Buffer.from(layer.weights, 'base64');
    expect(bytes.length).toBe(layer.inputs * layer.outputs * 4);
    expect(bytes.readFloatLE(0)).toBe(decodeFloat32(layer.weights)[0]);
    expect(Array.from(decodeFloat32(encodeFloat32([0.1, -2, 3.5])))).toEqual([Math.fround(0.1), -2, 3.5]);
  });

  it('is byte-identical when trained again with the same data, options and seed', () => {
    expect(serializeBundle(irisBundle().bundle)).toBe(text);
    expect(serializeBundle(irisBundle({ seed: 2 }).bundle)).not.toBe(text);
  });

  it('refuses a changed number with the file named and the hash field blamed', () => {
    const tampered = text.replace(/"temperature": ([0-9.]+)/, (_m, t: string) => `"temperature": ${Number(t) + 0.001}`);
    expect(tampered).not.toBe(text);
    const err = problemsOf(() => parseBundle(tampered, 'line3.bundle.json'));
    expect(err.message).toMatch(/^bundle line3\.bundle\.json refused: sha256: is [0-9a-f]{64} but the content hashes to [0-9a-f]{64}/);
  });

  it('refuses a flipped weight bit', () => {
    const copy = JSON.parse(text) as BundleFile;
    const w = Buffer.from(copy.members[2]!.layers[0]!.weights, 'base64');
    w[3] = (w[3] as number) ^ 0x01;
    copy.members[2]!.layers[0]!.weights = w.toString('base64');
    expect(problemsOf(() => parseBundle(JSON.stringify(copy), 'b.json')).problems[0]!.path).toBe('sha256');
  });

  it('refuses layers that disagree with the features or each other, naming the fields', () => {
    const err = problemsOf(() =>
      parseBundle(
        resealed((b) => {
          b.members[1]!.layers[0]!.inputs = 5;
        }),
        'b.json',
      ),
    );
    expect(err.problems.map((p) => p.path)).toEqual(expect.arrayContaining(['members[1].layers[0].inputs', 'members[1].layers[0].weights']));
    expect(err.message).toMatch(/members\[1\]\.layers\[0\]\.inputs: is 5 but the bundle lists 4 features/);
  });

  it('refuses a class list that does not match the outputs, and names mismatched reference features', () => {
    const err = problemsOf(() =>
      parseBundle(
        resealed((b) => {
          b.classes.push('hybrid');
          b.reference.features[1]!.name = 'sepal_wdth';
        }),
        'b.json',
      ),
    );
    const paths = err.problems.map((p) => p.path);
    expect(paths).toContain('members[0].layers[2].outputs');
    expect(paths).toContain('reference.features[1].name');
    expect(paths).toContain('reference.class_prior');
  });

  it('refuses schema violations with the JSON path of each field', () => {
    const err = problemsOf(() =>
      parseBundle(
        resealed((b) => {
          (b as { name: string }).name = 'Bad Name';
          b.preprocess.scale[2] = -1;
          (b.members[3]!.layers[1] as { activation: string }).activation = 'swish';
        }),
        'b.json',
      ),
    );
    expect(err.problems.map((p) => p.path)).toEqual(expect.arrayContaining(['name', 'preprocess.scale[2]', 'members[3].layers[1].activation']));
  });

  it('refuses duplicate feature names and a last layer that is not identity', () => {
    const err = problemsOf(() =>
      parseBundle(
        resealed((b) => {
          b.features[1]!.name = b.features[0]!.name;
          b.members[0]!.layers[2]!.activation = 'relu';
        }),
        'b.json',
      ),
    );
    expect(err.message).toMatch(/features: name "sepal_length" appears more than once/);
    expect(err.message).toMatch(/must be identity/);
  });

  it('refuses a field it does not know, whether or not the hash was recomputed', () => {
    const added = JSON.parse(text) as Record<string, unknown>;
    (added.calibration as Record<string, unknown>).note = 'tuned by hand';
    expect(problemsOf(() => parseBundle(JSON.stringify(added), 'b.json')).message).toMatch(/calibration: Unrecognized key: "note"/);
    const sealed = resealed((b) => void ((b as unknown as Record<string, unknown>).extra = 1));
    expect(problemsOf(() => parseBundle(sealed, 'b.json')).message).toMatch(/Unrecognized key: "extra"/);
  });

  it('refuses NaN or infinite float32 weights, a temperature outside [0.01, 100] and a __proto__ class', () => {
    const nan = resealed((b) => {
      const w = Buffer.from(b.members[4]!.layers[1]!.weights, 'base64');
      w.writeFloatLE(Number.NaN, 8);
      b.members[4]!.layers[1]!.weights = w.toString('base64');
    });
    expect(problemsOf(() => parseBundle(nan, 'b.json')).message).toMatch(/members\[4\]\.layers\[1\]\.weights: value 2 is NaN/);
    const cold = resealed((b) => void (b.calibration.temperature = 5e-324));
    expect(problemsOf(() => parseBundle(cold, 'b.json')).problems[0]!.path).toBe('calibration.temperature');
    const proto = resealed((b) => void (b.classes[0] = '__proto__'));
    expect(problemsOf(() => parseBundle(proto, 'b.json')).message).toMatch(/classes\[0\]: must not be __proto__/);
  });

  it('refuses other formats, text that is not JSON and files that cannot be read', async () => {
    expect(problemsOf(() => parseBundle(resealed((b) => void ((b as { format: string }).format = 'plumbline-bundle/9')), 'b.json')).message).toMatch(/format: is "plumbline-bundle\/9"/);
    expect(problemsOf(() => parseBundle(text.slice(0, 100), 'cut.json')).message).toMatch(/cut\.json refused: is not JSON/);
    await expect(readBundle(tmp.file('missing.bundle.json'))).rejects.toThrow(/cannot be read \(ENOENT\)/);
  });

  it('stores the reference the drift report needs: quantiles, decile bins, an exact sample, priors', () => {
    const r = trained.bundle.reference;
    expect(r.rows).toBe(150);
    expect(r.quantile_levels).toEqual([0.001, 0.01, 0.05, 0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 0.95, 0.99, 0.999]);
    const petal = r.features[2]!;
    expect(petal.min).toBe(1);
    expect(petal.max).toBe(6.9);
    expect(petal.bin_fractions.reduce((a, b) => a + b, 0)).toBeCloseTo(1, 12);
    expect(petal.bin_fractions).toHaveLength(petal.bin_edges.length + 1);
    // every row of a file under 10,000 rows, values exactly as read
    expect(r.sample.rows).toBe(150);
    expect(r.sample.subsampled).toBe(false);
    expect(r.sample.values[0]!.slice(0, 3)).toEqual([5.1, 4.9, 4.7]);
    expect(r.class_prior).toEqual({ setosa: 1 / 3, versicolor: 1 / 3, virginica: 1 / 3 });
    // every row's out-of-fold answer is the reference of the predictions
    expect(r.validation.rows).toBe(150);
    expect(r.validation.margins).toHaveLength(150);
  });

  it('records provenance and metrics in training', () => {
    const t = trained.bundle.training;
    expect(t.rows).toEqual({ total: 150, folds: 5, held_out: 150 });
    expect(t.seed).toBe(1);
    expect(t.options).toMatchObject({ hidden: [32, 32], activation: 'relu', folds: 5, validation_fraction: 0.2 });
    // five members, each trained on four folds (120 rows) less a fifth of those for early stopping
    expect(t.members.map((m) => m.train_rows + m.early_stopping_rows)).toEqual([120, 120, 120, 120, 120]);
    expect(t.members.every((m) => m.early_stopping_rows === 24)).toBe(true);
    expect(t.calibration_networks).toBe(10);
    expect(t.metrics.held_out?.confusion.flat().reduce((a, b) => a + b, 0)).toBe(150);
    expect(t.metrics.calibration.bins).toBe(15);
    expect(trained.bundle.created_at).toBe('2026-01-02T03:04:05Z');
  });

  it('matches the committed file format of the demo bundle: version 2, five members', () => {
    const demo = readFileSync(new URL('../../demo-data/models/moulding-quality.bundle.json', import.meta.url), 'utf8');
    const b = parseBundle(demo, 'demo');
    expect(b.file.format).toBe('plumbline-bundle/2');
    expect(b.members).toHaveLength(5);
  });

  it('refuses per-member detectors that do not match the members, and disagreement with one member', () => {
    const err = problemsOf(() =>
      parseBundle(
        resealed((b) => {
          b.domain.input_mahalanobis?.members.pop();
          b.members = b.members.slice(0, 1);
          b.domain.disagreement = { threshold: 0.1 };
        }),
        'b.json',
      ),
    );
    const paths = err.problems.map((p) => p.path);
    expect(paths).toContain('domain.input_mahalanobis.members');
    expect(paths).toContain('domain.disagreement');
  });

  it('refuses a training range that does not fit the features or lies outside the envelope', () => {
    const err = problemsOf(() =>
      parseBundle(
        resealed((b) => {
          b.domain.envelope.range.low.push(0);
          b.domain.envelope.range.high[0] = (b.domain.envelope.high[0] as number) + 1;
        }),
        'b.json',
      ),
    );
    const paths = err.problems.map((p) => p.path);
    expect(paths).toContain('domain.envelope.range.low');
    expect(paths).toContain('domain.envelope.range.high[0]');
  });
});
