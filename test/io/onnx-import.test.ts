import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { forward } from '../../src/core/network.js';
import { softmaxRowsInto } from '../../src/core/softmax.js';
import { standardize } from '../../src/core/standardize.js';
import { type ImportedGraph, OnnxError, importOnnx } from '../../src/io/onnx/index.js';
import { B2, W2, floats, ints, model, node } from '../helpers/onnx-builder.js';

// Fixtures: test/fixtures/make-onnx.py trains MLPs with PyTorch 1.13 on scikit-learn's Wine,
// Breast Cancer Wisconsin and Digits data, exports them with torch.onnx.export, and records
// PyTorch's probabilities; two graphs are built node by node with onnx.helper, their outputs
// computed with numpy.
const DIR = fileURLToPath(new URL('../fixtures/onnx/', import.meta.url));
interface Case {
  file: string;
  opset: number;
  ops: string[];
  features: string[];
  classes: string[];
  preprocess?: { mean: number[]; scale: number[] } | null;
  inside: { rows: number[][]; probabilities: number[][] };
  far: { rows: number[][]; probabilities: number[][] };
}
const expected = JSON.parse(readFileSync(`${DIR}expected.json`, 'utf8')) as { models: Case[]; handmade: Case[]; refused: Array<{ file: string; ops: string[] }> };
const cases = [...expected.models, ...expected.handmade];

function probabilities(g: ImportedGraph, rows: number[][]): number[][] {
  const d = g.network.layers[0]!.inputs;
  const x = Float64Array.from(rows.flat());
  const { logits } = forward(g.network, standardize(g.preprocess, x, rows.length), rows.length);
  const K = g.network.layers.at(-1)!.outputs;
  const p = new Float64Array(rows.length * K);
  softmaxRowsInto(logits, rows.length, K, 1, p);
  expect(d).toBe(rows[0]!.length);
  return rows.map((_, r) => Array.from(p.subarray(r * K, r * K + K)));
}

const worst = (a: number[][], b: number[][]): number => Math.max(...a.flatMap((row, r) => row.map((v, k) => Math.abs(v - (b[r]![k] as number)))));

describe('ONNX import against PyTorch and numpy', () => {
  it('covers every op the importer reads, and two opsets of each exported model', () => {
    const ops = new Set(cases.flatMap((c) => c.ops));
    for (const op of ['Gemm', 'MatMul', 'Add', 'Sub', 'Mul', 'Div', 'BatchNormalization', 'Relu', 'LeakyRelu', 'Elu', 'Sigmoid', 'Tanh', 'Sin', 'Softplus', 'Erf', 'Identity', 'Flatten', 'Reshape', 'Dropout', 'Softmax', 'LogSoftmax', 'Constant']) {
      expect(ops.has(op), op).toBe(true);
    }
    expect(new Set(cases.map((c) => c.opset))).toEqual(new Set([7, 9, 11, 13, 17]));
  });

  for (const c of cases) {
    it(`${c.file}: probabilities within 1e-5 of the reference on rows inside the data`, () => {
      const g = importOnnx(readFileSync(DIR + c.file), c.file, c.preprocess ?? undefined);
      expect(g.opset).toBe(c.opset);
      expect(worst(probabilities(g, c.inside.rows), c.inside.probabilities)).toBeLessThan(1e-5);
    });

    it(`${c.file}: probabilities within 1e-3 of the reference, and the same top class, on rows far outside`, () => {
      // The reference computes in float32. The worst-case rounding error of a float32 dot product
      // grows with the size of its terms (about n * 2^-24 * sum |w x|), and far rows put logits in
      // the hundreds (up to 560 here), so a logit may be off by up to about 1e-3; a logit error d
      // moves a softmax probability by at most d / 2. Hence 1e-3 on far rows, where 1e-5 holds
      // inside (measured worst: 2.4e-7 inside, 2.7e-6 far). The top class must agree wherever the
      // reference's margin exceeds that.
      const g = importOnnx(readFileSync(DIR + c.file), c.file, c.preprocess ?? undefined);
      const ours = probabilities(g, c.far.rows);
      expect(worst(ours, c.far.probabilities)).toBeLessThan(1e-3);
      ours.forEach((row, r) => {
        const ref = c.far.probabilities[r]!;
        const sorted = [...ref].sort((a, b) => b - a);
        if ((sorted[0] as number) - (sorted[1] as number) > 1e-3) expect(row.indexOf(Math.max(...row))).toBe(ref.indexOf(Math.max(...ref)));
      });
    });
  }

  it('reads activation constants stored as float32 as float32 (0.2 is 0.20000000298023224)', () => {
    const g = importOnnx(readFileSync(`${DIR}digits-mix-opset17.onnx`), 'digits', undefined);
    expect(g.network.layers.map((l) => l.activation)).toEqual(['leaky_relu', 'elu', 'sin', 'softplus', 'gelu', 'sigmoid', 'identity']);
    expect(g.network.layers[0]!.alpha).toBe(0.20000000298023224);
    expect(g.network.layers[1]!.alpha).toBe(0.5);
  });

  it('folds the graph’s own standardisation into the preprocess step and BatchNormalization into a layer', () => {
    const g = importOnnx(readFileSync(`${DIR}cancer-tanh-bn-opset13.onnx`), 'cancer', undefined);
    expect(g.network.layers.map((l) => [l.inputs, l.outputs, l.activation])).toEqual([
      [30, 12, 'tanh'],
      [12, 2, 'identity'],
    ]);
    expect(g.preprocess.mean).toHaveLength(30);
    expect(g.preprocess.scale.every((s) => s > 0)).toBe(true);
    expect(g.ending).toBe('log_softmax');
  });
});

describe('ONNX graphs plumbline refuses, with the reason', () => {
  const refusal = (file: string): string => {
    try {
      importOnnx(readFileSync(DIR + file), file);
    } catch (err) {
      expect(err).toBeInstanceOf(OnnxError);
      return (err as Error).message;
    }
    throw new Error(`${file} was imported`);
  };

  it('a convolution, naming the node, its op and what is supported', () => {
    expect(refusal('refused-conv.onnx')).toMatch(/^refused-conv\.onnx: node "[^"]+" \(Conv\) is not supported\. plumbline imports dense feed-forward classifiers built of: Gemm, MatMul, .*Softmax, LogSoftmax, Constant, Reciprocal, Neg, Sqrt \(on constants\)$/);
  });

  it('two inputs', () => {
    expect(refusal('refused-two-inputs.onnx')).toBe('refused-two-inputs.onnx: the graph has 2 inputs (x, z); plumbline imports graphs with one input, the feature vector');
  });

  it('a branch (a skip connection)', () => {
    expect(refusal('refused-residual.onnx')).toMatch(/the tensor "x" feeds 2 nodes \(.*\): the graph branches, as a skip connection does/);
  });

  it('truncated files and random bytes', () => {
    const good = readFileSync(`${DIR}wine-relu-opset17.onnx`);
    for (const cut of [1, 10, 100, good.length / 2, good.length - 3]) {
      expect(() => importOnnx(good.subarray(0, Math.floor(cut)), 'cut.onnx')).toThrow(OnnxError);
    }
    expect(() => importOnnx(Buffer.from('not an onnx file at all'), 'text.onnx')).toThrow(/^text\.onnx: /);
    expect(() => importOnnx(new Uint8Array(0), 'empty.onnx')).toThrow(/holds no graph/);
  });
});

describe('ONNX graphs built here to be refused (onnx-proto encoder)', () => {
  const fails = (bytes: Uint8Array): string => {
    try {
      importOnnx(bytes, 'm.onnx');
    } catch (err) {
      expect(err).toBeInstanceOf(OnnxError);
      return (err as Error).message.replace(/^m\.onnx: /, '');
    }
    throw new Error('imported');
  };
  const gemm = node('Gemm', ['x', 'W', 'B'], ['h'], { transB: { i: 1 } });

  it('the smallest graph imports: one Gemm', () => {
    const g = importOnnx(model({ nodes: [node('Gemm', ['x', 'W', 'B'], ['y'], { transB: { i: 1 } })], initializers: [W2, B2] }), 'm.onnx');
    expect(Array.from(g.network.layers[0]!.weights)).toEqual([1, 2, 3, 4]);
    expect(g.producer).toBe('onnx-builder.ts');
  });

  it('an operator set outside 7 to 17, another domain, a stray node, a cycle-free dead end', () => {
    expect(fails(model({ nodes: [node('Gemm', ['x', 'W', 'B'], ['y'])], initializers: [W2, B2], opset: 18 }))).toBe('uses operator set 18; plumbline imports operator sets 7 to 17');
    expect(fails(model({ nodes: [node('Gemm', ['x', 'W', 'B'], ['y'], {}, { domain: 'com.example' })], initializers: [W2, B2] }))).toMatch(/is from the operator domain "com.example"/);
    expect(fails(model({ nodes: [node('Gemm', ['x', 'W', 'B'], ['y']), node('Relu', ['W'], ['z'])], initializers: [W2, B2] }))).toMatch(/node "relu_z" \(Relu\) is not on the path from the input "x" to the output "y"/);
    expect(fails(model({ nodes: [node('Gemm', ['x', 'W', 'B'], ['h'])], initializers: [W2, B2] }))).toMatch(/the tensor "h" leads nowhere/);
  });

  it('Gemm with a transposed data input, a constant divided by the data, a Reshape to 3-D', () => {
    expect(fails(model({ nodes: [node('Gemm', ['x', 'W', 'B'], ['y'], { transA: { i: 1 } })], initializers: [W2, B2] }))).toMatch(/\(Gemm\) transposes its data input/);
    expect(fails(model({ nodes: [node('Div', ['c', 'x'], ['h']), node('Gemm', ['h', 'W', 'B'], ['y'])], initializers: [W2, B2, floats('c', [], [2])] }))).toMatch(/\(Div\) divides a constant by the data/);
    expect(fails(model({ nodes: [node('Reshape', ['x', 's'], ['h']), node('Gemm', ['h', 'W', 'B'], ['y'])], initializers: [W2, B2, { ...ints('s', [-1, 1, 2]), dims: [3] }] }))).toMatch(/reshapes to \[-1, 1, 2\]/);
  });

  it('a Softmax before the end, one output without a Sigmoid', () => {
    expect(fails(model({ nodes: [node('Softmax', ['x'], ['h']), node('Gemm', ['h', 'W', 'B'], ['y'])], initializers: [W2, B2] }))).toMatch(/\(Softmax\) is not the last node; a softmax may only end the graph/);
    expect(fails(model({ nodes: [node('Gemm', ['x', 'V', 'C'], ['y'], { transB: { i: 1 } })], initializers: [floats('V', [1, 2], [1, 1]), floats('C', [1], [0])] }))).toMatch(/^gives one output/);
  });

  it('a Sigmoid over one output is a binary classifier: logits 0 and z', () => {
    const g = importOnnx(model({ nodes: [node('Gemm', ['x', 'V', 'C'], ['h'], { transB: { i: 1 } }), node('Sigmoid', ['h'], ['y'])], initializers: [floats('V', [1, 2], [1, -1]), floats('C', [1], [0.25])] }), 'm.onnx');
    const { logits } = forward(g.network, Float64Array.from([2, 1]), 1);
    expect(Array.from(logits)).toEqual([0, 1.25]);
    expect(g.ending).toBe('sigmoid');
  });

  it('weights in an external file, integer weights, a tensor whose data does not fit its dimensions', () => {
    expect(fails(model({ nodes: [node('Gemm', ['x', 'W', 'B'], ['y'])], initializers: [{ ...W2, floatData: [], dataLocation: 1 }, B2] }))).toMatch(/keeps its data in an external file/);
    expect(fails(model({ nodes: [node('Gemm', ['x', 'W', 'B'], ['y'])], initializers: [{ name: 'W', dims: [2, 2], dataType: 6, int32Data: [1, 2, 3, 4] }, B2] }))).toMatch(/needs 2-D float weights/);
    expect(fails(model({ nodes: [node('Gemm', ['x', 'W', 'B'], ['y'])], initializers: [floats('W', [2, 2], [1, 2, 3]), B2] }))).toMatch(/tensor W holds 3 values but its dimensions \[2, 2\] need 4/);
  });

  it('an input that is not float, a Gemm whose width does not match the input', () => {
    expect(fails(model({ nodes: [node('Gemm', ['x', 'W', 'B'], ['y'])], initializers: [W2, B2], inputs: [{ name: 'x', width: 2, type: 7 }] }))).toMatch(/the input x has element type 7/);
    expect(fails(model({ nodes: [node('Gemm', ['x', 'W', 'B'], ['y'], { transB: { i: 1 } })], initializers: [W2, B2], inputs: [{ name: 'x', width: 3 }] }))).toMatch(/\(Gemm\) takes 2 values a row, but 3 arrive/);
  });
});

describe('ONNX edge cases (found in review), built here', () => {
  const x = Float64Array.from([0.7, -1.3]);
  const run = (bytes: Uint8Array, rows = x): number[] => {
    const g = importOnnx(bytes, 'm.onnx');
    const { logits } = forward(g.network, standardize(g.preprocess, rows, 1), 1);
    return Array.from(logits);
  };
  const fails = (bytes: Uint8Array): string => {
    try {
      importOnnx(bytes, 'm.onnx');
    } catch (err) {
      expect(err).toBeInstanceOf(OnnxError);
      return (err as Error).message.replace(/^m\.onnx: /, '');
    }
    throw new Error('imported');
  };
  // z = W x + B with W = [[1, 2], [3, 4]], B = [0.5, -0.5]: z = [-1.4, -3.6] for x above
  const z = [1 * 0.7 + 2 * -1.3 + 0.5, 3 * 0.7 + 4 * -1.3 - 0.5];
  const gemm = node('Gemm', ['x', 'W', 'B'], ['h'], { transB: { i: 1 } });

  it('keeps an activation on the class scores: the graph’s outputs are the logits, and the last layer stays affine', () => {
    const g = importOnnx(model({ nodes: [gemm, node('Relu', ['h'], ['y'])], initializers: [W2, B2] }), 'm.onnx');
    expect(g.network.layers.map((l) => l.activation)).toEqual(['relu', 'identity']);
    expect(run(model({ nodes: [gemm, node('Relu', ['h'], ['y'])], initializers: [W2, B2] }))).toEqual(z.map((v) => Math.max(0, v)));
    expect(run(model({ nodes: [gemm, node('Tanh', ['h'], ['t']), node('Softmax', ['t'], ['y'])], initializers: [W2, B2] }))).toEqual(z.map(Math.tanh));
  });

  it('reads an activation then a Sigmoid over one output as logits [0, f(z)]', () => {
    const bytes = model({ nodes: [node('Gemm', ['x', 'V', 'C'], ['h'], { transB: { i: 1 } }), node('Softplus', ['h'], ['s']), node('Sigmoid', ['s'], ['y'])], initializers: [floats('V', [1, 2], [1, -1]), floats('C', [1], [0.25])] });
    const zz = 0.7 + 1.3 + 0.25;
    const [l0, l1] = run(bytes);
    expect(l0).toBe(0);
    expect(l1).toBeCloseTo(Math.log1p(Math.exp(zz)), 6);
  });

  it('keeps a sign flip before the first layer out of the preprocessing scale: |scale| there, the weights negated', () => {
    // Sub(c, x) then Mul by -2: (c - x) * -2 = 2 (x - c)
    const bytes = model({ nodes: [node('Sub', ['c', 'x'], ['a']), node('Mul', ['a', 'k'], ['b']), node('Gemm', ['b', 'W', 'B'], ['y'], { transB: { i: 1 } })], initializers: [W2, B2, floats('c', [2], [1, 2]), floats('k', [2], [-2, 3])] });
    const g = importOnnx(bytes, 'm.onnx');
    expect(g.preprocess.scale.every((s) => s > 0)).toBe(true);
    expect(g.standardisesItself).toBe(true);
    const a = [(1 - 0.7) * -2, (2 - -1.3) * 3];
    const expected = [1 * a[0]! + 2 * a[1]! + 0.5, 3 * a[0]! + 4 * a[1]! - 0.5];
    run(bytes).forEach((v, k) => expect(v).toBeCloseTo(expected[k]!, 12));
  });

  it('refuses non-finite weights, constants and attributes, naming the node', () => {
    expect(fails(model({ nodes: [node('Gemm', ['x', 'W', 'B'], ['y'])], initializers: [W2, floats('B', [2], [Infinity, 0])] }))).toMatch(/that is Infinity/);
    expect(fails(model({ nodes: [node('Gemm', ['x', 'W', 'B'], ['y'])], initializers: [floats('W', [2, 2], [1, NaN, 3, 4]), B2] }))).toMatch(/\(Gemm\) has a weight that is NaN/);
    expect(fails(model({ nodes: [gemm, node('LeakyRelu', ['h'], ['y'], { alpha: { f: NaN } })], initializers: [W2, B2] }))).toMatch(/\(LeakyRelu\) has alpha = NaN/);
    expect(fails(model({ nodes: [node('Mul', ['x', 'k'], ['a']), node('Gemm', ['a', 'W', 'B'], ['y'])], initializers: [W2, B2, floats('k', [], [Infinity])] }))).toMatch(/\(Mul\) has a constant that is Infinity/);
  });

  it('refuses a tensor too large to read before allocating it, and an elementwise node without a constant', () => {
    const huge = { name: 'W', dims: [1_000_000, 1_000_000], dataType: 1 };
    expect(fails(model({ nodes: [node('Gemm', ['x', 'W', 'B'], ['y'])], initializers: [huge, B2] }))).toMatch(/more than the 16777216 values plumbline reads in one tensor/);
    expect(fails(model({ nodes: [node('Add', ['x'], ['a']), node('Gemm', ['a', 'W', 'B'], ['y'])], initializers: [W2, B2] }))).toMatch(/\(Add\) takes no constant/);
    expect(fails(model({ nodes: [node('Mul', ['x', 'x'], ['a']), node('Gemm', ['a', 'W', 'B'], ['y'])], initializers: [W2, B2] }))).toMatch(/\(Mul\) takes the same tensor twice/);
  });

  it('stops at a GELU that writes its own input (a cycle) instead of looping', () => {
    const bytes = model({
      nodes: [gemm, node('Div', ['h', 's2'], ['d']), node('Erf', ['d'], ['e']), node('Add', ['e', 'one'], ['p']), node('Mul', ['h', 'p'], ['m']), node('Mul', ['m', 'half'], ['h'])],
      initializers: [W2, B2, floats('s2', [], [Math.SQRT2]), floats('one', [], [1]), floats('half', [], [0.5])],
      outputs: ['h'],
    });
    expect(fails(bytes)).toMatch(/cycle/);
  });

  it('reads Dropout’s bool training_mode, leaves unused initializers unread, and allows no-ops after the Softmax', () => {
    const off = { name: 'tm', dims: [], dataType: 9, int32Data: [0] };
    const f16 = { name: 'unused', dims: [1], dataType: 10, int32Data: [15360] };
    expect(run(model({ nodes: [gemm, node('Dropout', ['h', 'r', 'tm'], ['d']), node('Softmax', ['d'], ['s']), node('Identity', ['s'], ['y'])], initializers: [W2, B2, floats('r', [], [0.5]), off, f16] }))).toEqual(z);
    expect(fails(model({ nodes: [gemm, node('Dropout', ['h', 'r', 'tm'], ['y'])], initializers: [W2, B2, floats('r', [], [0.5]), { ...off, int32Data: [1] }] }))).toMatch(/is in training mode/);
  });

  it('folds constants computed from constants (1 / std as Reciprocal), and Flatten with axis -1', () => {
    const bytes = model({
      nodes: [node('Reciprocal', ['std'], ['inv']), node('Flatten', ['x'], ['f'], { axis: { i: -1 } }), node('Sub', ['f', 'mean'], ['a']), node('Mul', ['a', 'inv'], ['b']), node('Gemm', ['b', 'W', 'B'], ['y'], { transB: { i: 1 } })],
      initializers: [W2, B2, floats('mean', [2], [0.5, -1]), floats('std', [2], [2, 4])],
    });
    const g = importOnnx(bytes, 'm.onnx');
    expect(g.preprocess.mean).toEqual([0.5, -1]);
    expect(g.preprocess.scale).toEqual([2, 4]);
    expect(fails(model({ nodes: [node('Reciprocal', ['x'], ['a']), node('Gemm', ['a', 'W', 'B'], ['y'])], initializers: [W2, B2] }))).toMatch(/\(Reciprocal\) works on the data; plumbline takes Reciprocal of constants only/);
  });

  it('refuses an attribute of the wrong type rather than reading a default', () => {
    expect(fails(model({ nodes: [gemm, node('LeakyRelu', ['h'], ['y'], { alpha: { i: 1 } })], initializers: [W2, B2] }))).toMatch(/\(LeakyRelu\) has attribute alpha of type 2, where ONNX defines type 1/);
  });
});
