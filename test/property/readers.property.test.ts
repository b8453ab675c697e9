import { readFileSync } from 'node:fs';
import { Readable } from 'node:stream';
import { fileURLToPath } from 'node:url';
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { canonicalJson, sha256Hex } from '../../src/bundle/canonical-json.js';
import { BundleError, parseBundle } from '../../src/bundle/verify.js';
import { DataFileError, openCsv } from '../../src/io/csv.js';
import { DataFileErrors, parseFeatures, planColumns } from '../../src/io/feature-table.js';
import { OnnxError, importOnnx } from '../../src/io/onnx/index.js';
import { model, node } from '../helpers/onnx-builder.js';
import { iris } from '../helpers/service.js';

// Property tests (fast-check): the readers of outside files never crash on garbage; they either
// read it or throw their own error type, whose message names the file.

const RUNS = 300;

/** Runs fn; passes when it returns, or throws one of the expected error types naming the source. */
function clearOrFine(fn: () => unknown, types: Array<new (...a: never[]) => Error>, source: string): void {
  try {
    fn();
  } catch (err) {
    if (!types.some((t) => err instanceof t)) throw new Error(`not a clear error: ${(err as Error)?.stack ?? String(err)}`);
    expect((err as Error).message).toContain(source);
  }
}

async function clearOrFineAsync(fn: () => Promise<unknown>, types: Array<new (...a: never[]) => Error>, source: string): Promise<void> {
  try {
    await fn();
  } catch (err) {
    if (!types.some((t) => err instanceof t)) throw new Error(`not a clear error: ${(err as Error)?.stack ?? String(err)}`);
    expect((err as Error).message).toContain(source);
  }
}

describe('bundle reader on garbage', () => {
  it('random bytes give a BundleError', () => {
    fc.assert(
      fc.property(fc.uint8Array({ maxLength: 4096 }), (bytes) => {
        expect(() => parseBundle(Buffer.from(bytes).toString('utf8'), 'garbage.bundle.json')).toThrow(BundleError);
      }),
      { numRuns: RUNS },
    );
  });

  it('random JSON values give a BundleError', () => {
    fc.assert(
      fc.property(fc.jsonValue({ maxDepth: 4 }), (v) => {
        expect(() => parseBundle(JSON.stringify(v), 'value.bundle.json')).toThrow(BundleError);
      }),
      { numRuns: RUNS },
    );
  });

  it('a real bundle with one byte changed gives a BundleError', () => {
    const text = JSON.stringify(iris());
    fc.assert(
      fc.property(fc.nat({ max: text.length - 1 }), fc.integer({ min: 1, max: 255 }), (at, delta) => {
        const bytes = Buffer.from(text, 'utf8');
        bytes[at] = ((bytes[at] as number) + delta) % 256;
        clearOrFine(() => parseBundle(bytes.toString('utf8'), 'flipped.bundle.json'), [BundleError], 'flipped.bundle.json');
      }),
      { numRuns: RUNS },
    );
  });

  it('a real bundle with any value replaced, and its hash made to match, gives a BundleError or still loads', () => {
    const original = JSON.parse(JSON.stringify(iris())) as Record<string, unknown>;
    // every path to a value in the bundle, to choose one from
    const paths: Array<Array<string | number>> = [];
    const walk = (v: unknown, at: Array<string | number>): void => {
      if (at.length > 0) paths.push(at);
      if (Array.isArray(v)) v.slice(0, 5).forEach((x, i) => walk(x, [...at, i]));
      else if (v && typeof v === 'object') for (const [k, x] of Object.entries(v)) if (k !== 'sha256') walk(x, [...at, k]);
    };
    walk(original, []);
    fc.assert(
      fc.property(fc.constantFrom(...paths), fc.jsonValue({ maxDepth: 2 }), (path, value) => {
        const b = structuredClone(original);
        let node = b as Record<string | number, unknown>;
        for (const k of path.slice(0, -1)) node = node[k] as Record<string | number, unknown>;
        node[path.at(-1) as string | number] = value;
        const { sha256: _, ...body } = b;
        const resealed = { ...body, sha256: sha256Hex(canonicalJson(body)) };
        clearOrFine(() => parseBundle(JSON.stringify(resealed), 'edited.bundle.json'), [BundleError], 'edited.bundle.json');
      }),
      { numRuns: RUNS },
    );
  });
});

describe('CSV reader on garbage', () => {
  const read = async (bytes: Uint8Array): Promise<void> => {
    const csv = await openCsv(Readable.from([Buffer.from(bytes)]), 'garbage.csv');
    const features = csv.header.slice(0, 3);
    const plan = planColumns(csv.header, 'garbage.csv', { features }, csv.headerLine);
    const x = new Float64Array(features.length);
    for await (const row of csv.rows) {
      try {
        parseFeatures(row.fields, row.line, plan, 'garbage.csv', x, 0);
      } catch (err) {
        if (!(err instanceof DataFileError || err instanceof DataFileErrors)) throw err;
      }
    }
  };

  it('random bytes are read or give a DataFileError', async () => {
    await fc.assert(
      fc.asyncProperty(fc.uint8Array({ maxLength: 2048 }), async (bytes) => clearOrFineAsync(() => read(bytes), [DataFileError, DataFileErrors], 'garbage.csv')),
      { numRuns: RUNS },
    );
  });

  it('text made of CSV punctuation is read or gives a DataFileError', async () => {
    const piece = fc.constantFrom('"', ',', '\n', '\r\n', '\r', 'a', '1.5', '-', 'e9', ' ', '""', '\u00e9', '\ufeff', 'melt_temp_c');
    await fc.assert(
      fc.asyncProperty(fc.array(piece, { maxLength: 200 }), async (parts) => clearOrFineAsync(() => read(Buffer.from(parts.join(''), 'utf8')), [DataFileError, DataFileErrors], 'garbage.csv')),
      { numRuns: RUNS },
    );
  });
});

describe('ONNX reader on garbage', () => {
  const good = readFileSync(fileURLToPath(new URL('../fixtures/onnx/digits-mix-opset17.onnx', import.meta.url)));

  it('random bytes give an OnnxError', () => {
    fc.assert(
      fc.property(fc.uint8Array({ maxLength: 4096 }), (bytes) => clearOrFine(() => importOnnx(bytes, 'garbage.onnx'), [OnnxError], 'garbage.onnx')),
      { numRuns: RUNS },
    );
  });

  it('a real model with bytes changed gives an OnnxError or still imports', () => {
    fc.assert(
      fc.property(fc.array(fc.tuple(fc.nat({ max: good.length - 1 }), fc.integer({ min: 1, max: 255 })), { minLength: 1, maxLength: 8 }), (edits) => {
        const bytes = Buffer.from(good);
        for (const [at, delta] of edits) bytes[at] = ((bytes[at] as number) + delta) % 256;
        clearOrFine(() => importOnnx(bytes, 'edited.onnx'), [OnnxError], 'edited.onnx');
      }),
      { numRuns: RUNS },
    );
  });

  it('a real model cut short gives an OnnxError', () => {
    fc.assert(
      fc.property(fc.nat({ max: good.length - 1 }), (n) => {
        expect(() => importOnnx(good.subarray(0, n), 'cut.onnx')).toThrow(OnnxError);
      }),
      { numRuns: 100 },
    );
  });
});

describe('ONNX reader on random graphs that decode', () => {
  const OPS = ['Gemm', 'MatMul', 'Add', 'Sub', 'Mul', 'Div', 'Relu', 'Sigmoid', 'Softmax', 'Identity', 'Flatten', 'Reshape', 'BatchNormalization', 'Erf', 'Dropout', 'Reciprocal', 'LeakyRelu', 'Constant', 'Conv'];
  const value = fc.oneof(fc.double({ min: -10, max: 10, noNaN: true }), fc.constantFrom(0, 1, -1, Math.SQRT2, 0.5, Number.NaN, Number.POSITIVE_INFINITY));
  const tensor = (name: string) =>
    fc.record({ dims: fc.array(fc.integer({ min: 0, max: 3 }), { maxLength: 3 }), type: fc.constantFrom(1, 11, 7, 9, 6, 10) }).chain(({ dims, type }) => {
      const n = dims.reduce((a, b) => a * b, 1);
      return fc.array(value, { minLength: n, maxLength: n + (n === 0 ? 1 : 0) }).map((values) =>
        type === 1 ? { name, dims, dataType: 1, floatData: values } : type === 11 ? { name, dims, dataType: 11, doubleData: values } : { name, dims, dataType: type, int32Data: values.map((v) => (Number.isFinite(v) ? Math.trunc(v) : 0)) },
      );
    });
  const graph = fc
    .record({
      inits: fc.array(fc.constantFrom('W', 'B', 'c', 's', 'k'), { maxLength: 5 }),
      nodes: fc.array(
        fc.record({
          op: fc.constantFrom(...OPS),
          ins: fc.array(fc.constantFrom('x', 'W', 'B', 'c', 's', 'k', 't0', 't1', 't2', 't3', ''), { maxLength: 3 }),
          out: fc.constantFrom('t0', 't1', 't2', 't3', 'y', 'x'),
          attr: fc.option(fc.record({ name: fc.constantFrom('alpha', 'beta', 'transB', 'axis', 'epsilon'), v: value, asInt: fc.boolean() }), { nil: undefined }),
        }),
        { minLength: 1, maxLength: 6 },
      ),
      width: fc.integer({ min: 1, max: 3 }),
    })
    .chain((g) => fc.tuple(fc.constant(g), fc.tuple(...[...new Set(g.inits)].map((n) => tensor(n)))));

  // Chains: node i takes the previous node's output, and maybe constants; the last writes y.
  const chain = fc
    .record({
      inits: fc.array(fc.constantFrom('W', 'B', 'c', 's', 'k'), { maxLength: 5 }),
      nodes: fc.array(
        fc.record({
          op: fc.constantFrom(...OPS),
          extra: fc.array(fc.constantFrom('W', 'B', 'c', 's', 'k', ''), { maxLength: 2 }),
          attr: fc.option(fc.record({ name: fc.constantFrom('alpha', 'beta', 'transB', 'axis', 'epsilon'), v: value, asInt: fc.boolean() }), { nil: undefined }),
        }),
        { minLength: 1, maxLength: 6 },
      ),
      width: fc.integer({ min: 1, max: 3 }),
    })
    .chain((g) => fc.tuple(fc.constant(g), fc.tuple(...[...new Set(g.inits)].map((n) => tensor(n)))));

  it('chains of random nodes never fail other than with an OnnxError', () => {
    fc.assert(
      fc.property(chain, ([g, inits]) => {
        const bytes = model({
          nodes: g.nodes.map((n, i) => node(n.op, [i === 0 ? 'x' : `t${i - 1}`, ...n.extra], [i === g.nodes.length - 1 ? 'y' : `t${i}`], n.attr ? { [n.attr.name]: n.attr.asInt ? { i: Number.isFinite(n.attr.v) ? Math.trunc(n.attr.v) : 0 } : { f: n.attr.v } } : {})),
          initializers: inits as never,
          inputs: [{ name: 'x', width: g.width }],
        });
        clearOrFine(() => importOnnx(bytes, 'random.onnx'), [OnnxError], 'random.onnx');
      }),
      { numRuns: 3000 },
    );
  });

  it('never fails other than with an OnnxError, and always ends', () => {
    fc.assert(
      fc.property(graph, ([g, inits]) => {
        const bytes = model({
          nodes: g.nodes.map((n) => node(n.op, n.ins, [n.out], n.attr ? { [n.attr.name]: n.attr.asInt ? { i: Number.isFinite(n.attr.v) ? Math.trunc(n.attr.v) : 0 } : { f: n.attr.v } } : {})),
          initializers: inits as never,
          inputs: [{ name: 'x', width: g.width }],
        });
        clearOrFine(() => importOnnx(bytes, 'random.onnx'), [OnnxError], 'random.onnx');
      }),
      { numRuns: 2000 },
    );
  });
});
