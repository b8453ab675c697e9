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
