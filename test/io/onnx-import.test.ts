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
    expect(refusal('refused-conv.onnx')).toMatch(/^refused-conv\.onnx: node "[^"]+" \(Conv\) is not supported\. plumbline imports dense feed-forward classifiers built of: Gemm, MatMul, .*Softmax, LogSoftmax, Constant$/);
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

  it('a Softmax before the end, an activation after the last layer without one, one output', () => {
    expect(fails(model({ nodes: [node('Softmax', ['x'], ['h']), node('Gemm', ['h', 'W', 'B'], ['y'])], initializers: [W2, B2] }))).toMatch(/\(Softmax\) is not the last node; a softmax may only end the graph/);
    expect(fails(model({ nodes: [gemm, node('Relu', ['h'], ['y'])], initializers: [W2, B2] }))).toMatch(/^ends in relu after its last dense layer/);
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
