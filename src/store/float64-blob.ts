/** Little-endian float64 bytes: how vectors are stored, so every value round-trips exactly. */
export function toFloat64Blob(values: ArrayLike<number>): Buffer {
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
