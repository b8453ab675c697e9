import { endianness } from 'node:os';

const LITTLE_ENDIAN = endianness() === 'LE';

/**
 * Little-endian float64 bytes: how vectors are stored, so every value round-trips exactly. A
 * Float64Array on a little-endian machine already is those bytes: the Buffer is a view of it, no
 * copy (SQLite copies the bytes when the statement runs).
 */
export function toFloat64Blob(values: ArrayLike<number>): Buffer {
  if (LITTLE_ENDIAN && values instanceof Float64Array) return Buffer.from(values.buffer, values.byteOffset, values.byteLength);
  const buf = Buffer.allocUnsafe(values.length * 8);
  for (let i = 0; i < values.length; i++) buf.writeDoubleLE(values[i] as number, i * 8);
  return buf;
}

export function fromFloat64Blob(buf: Uint8Array): Float64Array {
  const b = Buffer.from(buf.buffer, buf.byteOffset, buf.byteLength);
  const out = new Float64Array(b.length / 8);
  for (let i = 0; i < out.length; i++) out[i] = b.readDoubleLE(i * 8);
  return out;
}
