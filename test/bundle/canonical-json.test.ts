import { describe, expect, it } from 'vitest';
import { canonicalJson, prettyJson } from '../../src/bundle/canonical-json.js';

describe('canonical JSON (RFC 8785)', () => {
  it('sorts keys by UTF-16 code units, as in the example of RFC 8785 section 3.2.3', () => {
    const input = {
      '\u20ac': 'Euro Sign',
      '\r': 'Carriage Return',
      '\ufb33': 'Hebrew Letter Dalet With Dagesh',
      '1': 'One',
      '\ud83d\ude00': 'Emoji: Grinning Face',
      '\u0080': 'Control',
      '\u00f6': 'Latin Small Letter O With Diaeresis',
    };
    // the RFC's order: carriage return, "1", U+0080, U+00F6, U+20AC, the surrogate pair, U+FB33
    expect(canonicalJson(input)).toBe(
      '{"\\r":"Carriage Return","1":"One","\u0080":"Control","\u00f6":"Latin Small Letter O With Diaeresis",' +
        '"\u20ac":"Euro Sign","\ud83d\ude00":"Emoji: Grinning Face","\ufb33":"Hebrew Letter Dalet With Dagesh"}',
    );
  });

  it('writes numbers in the ECMAScript form of RFC 8785 Appendix B (values from memory of that table)', () => {
    const cases: Array<[number, string]> = [
      [0, '0'],
      [-0, '0'],
      [5e-324, '5e-324'],
      [1.7976931348623157e308, '1.7976931348623157e+308'],
      [9007199254740992, '9007199254740992'],
      [1e21, '1e+21'],
      [0.000001, '0.000001'],
      [9.999999999999997e-7, '9.999999999999997e-7'],
    ];
    for (const [v, text] of cases) expect(canonicalJson(v)).toBe(text);
  });

  it('has no whitespace and omits undefined members', () => {
    expect(canonicalJson({ b: [1, { d: true, c: null }], a: 'x', u: undefined })).toBe('{"a":"x","b":[1,{"c":null,"d":true}]}');
  });

  it('refuses numbers JSON cannot hold', () => {
    expect(() => canonicalJson({ x: Number.NaN })).toThrow(/NaN/);
    expect(() => canonicalJson([Infinity])).toThrow(/Infinity/);
  });
});

describe('pretty JSON', () => {
  it('parses back to the same value and keeps arrays of numbers on one line', () => {
    const value = { a: [1, 2.5, -3e-9], b: { c: [{ d: 'x' }], e: [] }, f: null };
    const text = prettyJson(value);
    expect(JSON.parse(text)).toEqual(value);
    expect(text).toContain('"a": [1, 2.5, -3e-9]');
  });
});
