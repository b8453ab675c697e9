/** Base64 of little-endian IEEE 754 float32 values: the bundle's encoding of weights and biases. */
export function encodeFloat32(values: ArrayLike<number>): string {
  const buf = Buffer.alloc(values.length * 4);
  for (let i = 0; i < values.length; i++) buf.writeFloatLE(values[i] as number, i * 4);
  return buf.toString('base64');
}

const BASE64 = /^[A-Za-z0-9+/]*={0,2}$/;

/** Decodes encodeFloat32's output into float64 values; throws when the text is not whole float32s. */
export function decodeFloat32(text: string, expected?: number): Float64Array {
  if (text.length % 4 !== 0 || !BASE64.test(text)) throw new RangeError('is not base64 text');
  const buf = Buffer.from(text, 'base64');
  if (buf.length % 4 !== 0) throw new RangeError(`holds ${buf.length} bytes, not a whole number of float32 values`);
  const n = buf.length / 4;
  if (expected !== undefined && n !== expected) throw new RangeError(`holds ${n} float32 values, expected ${expected}`);
  const out = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    const v = buf.readFloatLE(i * 4);
    if (!Number.isFinite(v)) throw new RangeError(`value ${i} is ${v}`);
    out[i] = v;
  }
  return out;
}
