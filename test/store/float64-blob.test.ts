import { describe, expect, it } from 'vitest';
import { fromFloat64Blob, toFloat64Blob } from '../../src/store/float64-blob.js';

// IEEE 754 binary64, little-endian: 1.5 is 0x3FF8000000000000, -2 is 0xC000000000000000, and the
// smallest subnormal is 0x0000000000000001 (the standard's encoding, from memory; Python's
// struct.pack('<d', ...) gives the same bytes).
const BYTES = '000000000000f83f' + '00000000000000c0' + '0100000000000000';

describe('float64 blobs', () => {
  it('are little-endian binary64, from a plain array and from a view into a larger Float64Array alike', () => {
    const values = [1.5, -2, Number.MIN_VALUE];
    expect(toFloat64Blob(values).toString('hex')).toBe(BYTES);
    // A view in the middle of a larger array: only its own bytes.
    const big = Float64Array.of(7, 1.5, -2, Number.MIN_VALUE, 9);
    expect(toFloat64Blob(big.subarray(1, 4)).toString('hex')).toBe(BYTES);
  });

  it('round-trip every value, -0 and NaN payloads among them', () => {
    const values = Float64Array.of(-0, 0.1, 1e308, -Number.MAX_VALUE, Number.EPSILON, Number.NaN);
    const back = fromFloat64Blob(toFloat64Blob(values));
    expect(Array.from(back).map((v) => Object.is(v, -0) ? '-0' : String(v))).toEqual(Array.from(values).map((v) => Object.is(v, -0) ? '-0' : String(v)));
  });
});
