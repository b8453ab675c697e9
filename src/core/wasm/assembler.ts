// Just enough of a WebAssembly assembler to emit the kernels as bytes: LEB128 numbers, sections,
// structured control and the opcodes used (WebAssembly core specification 2.0, binary format,
// and its SIMD instructions).

export const uleb = (v: number): number[] => {
  const out: number[] = [];
  do {
    let byte = v & 0x7f;
    v >>>= 7;
    if (v !== 0) byte |= 0x80;
    out.push(byte);
  } while (v !== 0);
  return out;
};
export const sleb = (v: number): number[] => {
  const out: number[] = [];
  for (;;) {
    const byte = v & 0x7f;
    v >>= 7;
    if ((v === 0 && (byte & 0x40) === 0) || (v === -1 && (byte & 0x40) !== 0)) return [...out, byte];
    out.push(byte | 0x80);
  }
};
export const str = (s: string): number[] => [...uleb(s.length), ...Buffer.from(s, 'utf8')];
export const section = (id: number, body: number[]): number[] => [id, ...uleb(body.length), ...body];

export const I32 = 0x7f;
export const V128 = 0x7b;
export const get = (l: number): number[] => [0x20, ...uleb(l)];
export const set = (l: number): number[] => [0x21, ...uleb(l)];
export const i32c = (v: number): number[] => [0x41, ...sleb(v)];
export const ADD = [0x6a];
export const MUL = [0x6c];
export const GE_S = [0x4e];
export const GT_S = [0x4a];
export const EQZ = [0x45];
export const SUB = [0x6b];
export type Code = number | number[];
export const block = (...body: Code[]): number[] => [0x02, 0x40, ...body.flat(), 0x0b];
export const loop = (...body: Code[]): number[] => [0x03, 0x40, ...body.flat(), 0x0b];
export const br = (depth: number): number[] => [0x0c, ...uleb(depth)];
export const brIf = (depth: number): number[] => [0x0d, ...uleb(depth)];
export const vload = (offset: number): number[] => [0xfd, 0x00, 3, ...uleb(offset)];
export const vstore = (offset: number): number[] => [0xfd, 0x0b, 3, ...uleb(offset)];
export const loadSplat = [0xfd, 0x0a, 3, 0]; // v128.load64_splat
export const FADD = [0xfd, ...uleb(0xf0)]; // f64x2.add
export const FMUL = [0xfd, ...uleb(0xf2)]; // f64x2.mul
export const F64 = 0x7c;
export const f64load = [0x2b, 3, 0];
export const f64store = [0x39, 3, 0];
export const tee = (l: number): number[] => [0x22, ...uleb(l)];
export const FSUB = [0xfd, ...uleb(0xf1)]; // f64x2.sub
/** f64x2.pmax: per lane, a < b ? b : a (pseudo-maximum: no NaN or signed-zero rules of its own). */
export const FPMAX = [0xfd, ...uleb(0xf7)];
/** The byte address of element `index` of the array at `base`: base + index * 8. */
export const at = (base: number, index: number): number[] => [...get(base), ...get(index), ...i32c(8), ...MUL, ...ADD];
