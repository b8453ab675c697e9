import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { firstInvalidUtf8, mayNeedScan, scanJson } from '../../src/http/json-scan.js';

// The scanner behind the JSON body checks (src/http/json-scan.ts), against what it must agree with:
// JSON.stringify never writes a name twice, so any such text scans clean; a name written again
// into one object is found, at its path; Node's own UTF-8 check (buffer.isUtf8) decides validity.

/** JSON values with objects nested inside arrays and objects, strings of any code points. */
const value = fc.letrec((tie) => ({
  any: fc.oneof({ depthSize: 'small' }, fc.string({ unit: 'grapheme' }), fc.double({ noNaN: true, noDefaultInfinity: true }), fc.boolean(), fc.constant(null), tie('array'), tie('object')),
  array: fc.array(tie('any'), { maxLength: 4 }),
  object: fc.dictionary(fc.string({ unit: 'grapheme', maxLength: 6 }), tie('any'), { maxKeys: 4 }),
})).any;

/** Every object in `v` with its path. */
function objects(v: unknown, path: Array<string | number> = []): Array<{ path: Array<string | number>; obj: Record<string, unknown> }> {
  if (Array.isArray(v)) return v.flatMap((x, i) => objects(x, [...path, i]));
  if (v !== null && typeof v === 'object') {
    const o = v as Record<string, unknown>;
    return [{ path, obj: o }, ...Object.entries(o).flatMap(([k, x]) => objects(x, [...path, k]))];
  }
  return [];
}

describe('scanJson', () => {
  it('finds nothing in what JSON.stringify writes', () => {
    fc.assert(
      fc.property(value, (v) => {
        expect(scanJson(JSON.stringify(v))).toBeNull();
      }),
      { numRuns: 300 },
    );
  });

  it('finds a name written twice into one object, at its path, whatever the nesting', () => {
    fc.assert(
      fc.property(value, fc.nat(), (v, pick) => {
        const withNames = objects(v).filter((o) => Object.keys(o.obj).length > 0);
        fc.pre(withNames.length > 0);
        const target = withNames[pick % withNames.length]!;
        const name = Object.keys(target.obj)[0]!;
        // Write the object's text with its first name repeated at the end.
        const marker = '\u0000MARK\u0000';
        target.obj[marker] = 0;
        // A function as the replacement: a name such as "$&" would be read as a replacement pattern.
        const text = JSON.stringify(v).replace(`${JSON.stringify(marker)}:0`, () => `${JSON.stringify(name)}:1`);
        delete target.obj[marker];
        expect(scanJson(text)).toEqual({ kind: 'duplicate', path: [...target.path, name] });
      }),
      { numRuns: 300 },
    );
  });

  it('finds a lone surrogate escape in a name or a value, and not a pair', () => {
    expect(scanJson('{"a":["x","\\ud83d\\ude00"],"b":{"c":"\\ud800"}}')).toEqual({ kind: 'lone-surrogate', path: ['b', 'c'] });
    expect(scanJson('[1,{"\\udfff":2}]')).toEqual({ kind: 'lone-surrogate', path: [1, '\uFFFD'] });
    expect(scanJson('{"a":"\\ud83d\\ude00"}')).toBeNull();
  });
});

describe('mayNeedScan, the quick count before the full walk', () => {
  /** The text of `v` with the first name of one of its objects written again, and a random indent. */
  const withDuplicate = (v: unknown, pick: number, indent: number): string | null => {
    const withNames = objects(v).filter((o) => Object.keys(o.obj).length > 0);
    if (withNames.length === 0) return null;
    const target = withNames[pick % withNames.length]!;
    const name = Object.keys(target.obj)[0]!;
    const marker = '\u0000MARK\u0000';
    target.obj[marker] = 0;
    const text = JSON.stringify(v, null, indent)
      .replace(`${JSON.stringify(marker)}: 0`, () => `${JSON.stringify(name)} : 1`)
      .replace(`${JSON.stringify(marker)}:0`, () => `${JSON.stringify(name)}:1`);
    delete target.obj[marker];
    return text;
  };

  it('never lets pass a text in which scanJson finds something', () => {
    fc.assert(
      fc.property(value, fc.nat(), fc.nat({ max: 3 }), (v, pick, indent) => {
        const text = withDuplicate(v, pick, indent);
        fc.pre(text !== null);
        expect(scanJson(text as string)).not.toBeNull();
        expect(mayNeedScan(text as string, JSON.parse(text as string))).toBe(true);
      }),
      { numRuns: 300 },
    );
    for (const text of ['{"a":"\\ud800"}', '{"a":{"b":1,"b":2}}', '[{"x":1},{"y":{"z":[1,{"z":0,"z":1}]}}]', '{"a" \n :1, "a"\t:2}']) {
      expect(scanJson(text)).not.toBeNull();
      expect(mayNeedScan(text, JSON.parse(text))).toBe(true);
    }
  });

  it('lets a scoring body pass without the walk, and sends a value holding a quote-colon to it', () => {
    const body = { features: [232.1, 53.8, 923, 478, 3.48, 14.18, 102, 5.4, 23.7, 47.93], tags: { line: '3', station: 'moulding-3' } };
    for (const text of [JSON.stringify(body), JSON.stringify(body, null, 2), JSON.stringify({ items: [body, body, body] })]) expect(mayNeedScan(text, JSON.parse(text))).toBe(false);
    const tricky = JSON.stringify({ tags: { note: 'a": b' } });
    expect(mayNeedScan(tricky, JSON.parse(tricky))).toBe(true);
    expect(scanJson(tricky)).toBeNull();
  });
});

describe('firstInvalidUtf8', () => {
  it('agrees with buffer.isUtf8, and points at a byte from which decoding fails', async () => {
    const { isUtf8 } = await import('node:buffer');
    fc.assert(
      fc.property(fc.uint8Array({ maxLength: 40 }), (bytes) => {
        const at = firstInvalidUtf8(bytes);
        expect(at === -1).toBe(isUtf8(bytes));
        if (at >= 0) {
          expect(isUtf8(bytes.subarray(0, at))).toBe(true);
          expect(isUtf8(bytes.subarray(0, at + 4 > bytes.length ? bytes.length : at + 4))).toBe(false);
        }
      }),
      { numRuns: 2000 },
    );
  });
});
