import { type ActivationName, activateInPlace } from './activations.js';
import { type DenseLayer, type ForwardPass, type Network, checkNetworkShapes, createForwardPass } from './network.js';

// A WebAssembly SIMD kernel for the dense layers, emitted as bytes here (no toolchain, no file to
// build): two float64 lanes per instruction, blocks of 4 rows x 4 outputs in registers. Each sum
// starts at b[o] and adds x[r,i] * W[o,i] in order of i with a multiply and then an add (WebAssembly
// never fuses them), so every result has the same bits as the plain loop in network.ts.

const uleb = (v: number): number[] => {
  const out: number[] = [];
  do {
    let byte = v & 0x7f;
    v >>>= 7;
    if (v !== 0) byte |= 0x80;
    out.push(byte);
  } while (v !== 0);
  return out;
};
const sleb = (v: number): number[] => {
  const out: number[] = [];
  for (;;) {
    const byte = v & 0x7f;
    v >>= 7;
    if ((v === 0 && (byte & 0x40) === 0) || (v === -1 && (byte & 0x40) !== 0)) return [...out, byte];
    out.push(byte | 0x80);
  }
};
const str = (s: string): number[] => [...uleb(s.length), ...Buffer.from(s, 'utf8')];
const section = (id: number, body: number[]): number[] => [id, ...uleb(body.length), ...body];

// Opcodes (WebAssembly core specification 2.0, binary format, and its SIMD instructions).
const I32 = 0x7f;
const V128 = 0x7b;
const get = (l: number): number[] => [0x20, ...uleb(l)];
const set = (l: number): number[] => [0x21, ...uleb(l)];
const i32c = (v: number): number[] => [0x41, ...sleb(v)];
const ADD = [0x6a];
const MUL = [0x6c];
const GE_S = [0x4e];
const GT_S = [0x4a];
const EQZ = [0x45];
const SUB = [0x6b];
type Code = number | number[];
const block = (...body: Code[]): number[] => [0x02, 0x40, ...body.flat(), 0x0b];
const loop = (...body: Code[]): number[] => [0x03, 0x40, ...body.flat(), 0x0b];
const br = (depth: number): number[] => [0x0c, ...uleb(depth)];
const brIf = (depth: number): number[] => [0x0d, ...uleb(depth)];
const vload = (offset: number): number[] => [0xfd, 0x00, 3, ...uleb(offset)];
const vstore = (offset: number): number[] => [0xfd, 0x0b, 3, ...uleb(offset)];
const loadSplat = [0xfd, 0x0a, 3, 0]; // v128.load64_splat
const FADD = [0xfd, ...uleb(0xf0)]; // f64x2.add
const FMUL = [0xfd, ...uleb(0xf2)]; // f64x2.mul

// dense(x, xs, n, w, b, out, os, rows, blocks): addresses and strides in bytes.
const [X, XS, N, W, B, OUT, OS, ROWS, BLOCKS] = [0, 1, 2, 3, 4, 5, 6, 7, 8];
const [R, BLK, I, WP, P0, P1, P2, P3, OP, BP] = [9, 10, 11, 12, 13, 14, 15, 16, 17, 18];
const ACC = [19, 20, 21, 22, 23, 24, 25, 26]; // rows 0..3, each outputs 0-1 and 2-3
const [WA, WB, V] = [27, 28, 29];
const PTR = [P0, P1, P2, P3];

/** One pass over the 4-output blocks for `lanes` rows starting at row R. */
function blocks(lanes: number): number[] {
  const acc = (row: number, half: number): number => ACC[row * 2 + half] as number;
  const rows = Array.from({ length: lanes }, (_, k) => k);
  return [
    ...i32c(0),
    ...set(BLK),
    ...block(
      loop(
        get(BLK), get(BLOCKS), GE_S, brIf(1),
        // wp = w + blk * n * 32; the bias of the block into every row's sums
        get(W), get(BLK), get(N), MUL, i32c(32), MUL, ADD, set(WP),
        get(B), get(BLK), i32c(32), MUL, ADD, set(BP),
        ...rows.flatMap((k) => [...get(BP), ...vload(0), ...set(acc(k, 0)), ...get(BP), ...vload(16), ...set(acc(k, 1))]),
        // row pointers
        get(X), get(R), get(XS), MUL, ADD, set(P0),
        ...rows.slice(1).flatMap((k) => [...get(PTR[k - 1] as number), ...get(XS), ...ADD, ...set(PTR[k] as number)]),
        get(N), set(I),
        block(
          loop(
            get(I), EQZ, brIf(1),
            get(WP), vload(0), set(WA),
            get(WP), vload(16), set(WB),
            ...rows.flatMap((k) => {
              const p = PTR[k] as number;
              // v = splat(x[r + k, i]); acc += v * w, for both halves
              return [
                ...get(p), ...loadSplat, ...set(V),
                ...get(acc(k, 0)), ...get(V), ...get(WA), ...FMUL, ...FADD, ...set(acc(k, 0)),
                ...get(acc(k, 1)), ...get(V), ...get(WB), ...FMUL, ...FADD, ...set(acc(k, 1)),
              ];
            }),
            get(WP), i32c(32), ADD, set(WP),
            ...rows.flatMap((k) => [...get(PTR[k] as number), ...i32c(8), ...ADD, ...set(PTR[k] as number)]),
            get(I), i32c(1), SUB, set(I),
            br(0),
          ),
        ),
        // out + r * os + blk * 32, one row after another
        get(OUT), get(R), get(OS), MUL, ADD, get(BLK), i32c(32), MUL, ADD, set(OP),
        ...rows.flatMap((k) => [
          ...get(OP), ...get(acc(k, 0)), ...vstore(0),
          ...get(OP), ...get(acc(k, 1)), ...vstore(16),
          ...get(OP), ...get(OS), ...ADD, ...set(OP),
        ]),
        get(BLK), i32c(1), ADD, set(BLK),
        br(0),
      ),
    ),
  ];
}

// solve(lt, out, n): forward substitution by columns over L^T (row-major, so that a column of L
// is contiguous). out holds v on entry and y on return: for each k, y_k = out[k] / L[k,k], then
// out[i] = out[i] - L[i,k] * y_k for i > k, two lanes at a time. Each out[i] takes its terms in
// order of k, as in the row-by-row definition, so the bits are the same as linalg.ts's.
const F64 = 0x7c;
const [LT, SOUT, SN] = [0, 1, 2];
const [K, SI, COL, SP, Y, VY] = [3, 4, 5, 6, 7, 8];
const f64load = [0x2b, 3, 0];
const f64store = [0x39, 3, 0];
const tee = (l: number): number[] => [0x22, ...uleb(l)];
const FSUB = [0xfd, ...uleb(0xf1)]; // f64x2.sub
/** The byte address of element `index` of the array at `base`: base + index * 8. */
const at = (base: number, index: number): number[] => [...get(base), ...get(index), ...i32c(8), ...MUL, ...ADD];

function solveBody(): number[] {
  return [
    ...i32c(0),
    ...set(K),
    ...block(
      loop(
        get(K), get(SN), GE_S, brIf(1),
        // col = lt + k * n * 8
        get(LT), get(K), get(SN), MUL, i32c(8), MUL, ADD, set(COL),
        // y = out[k] / col[k]; out[k] = y
        at(SOUT, K), tee(SP), f64load, at(COL, K), f64load, [0xa3], set(Y),
        get(SP), get(Y), f64store,
        get(Y), [0xfd, 0x14], set(VY), // f64x2.splat
        get(K), i32c(1), ADD, set(SI),
        // two at a time: out[i..i+1] = out[i..i+1] - col[i..i+1] * y
        block(
          loop(
            get(SI), i32c(2), ADD, get(SN), GT_S, brIf(1),
            at(SOUT, SI), tee(SP),
            get(SP), vload(0),
            at(COL, SI), vload(0), get(VY), FMUL, FSUB,
            vstore(0),
            get(SI), i32c(2), ADD, set(SI),
            br(0),
          ),
        ),
        // the last one, when n - k - 1 is odd
        get(SI), get(SN), [0x48], // i32.lt_s
        [0x04, 0x40], // if
        at(SOUT, SI), tee(SP),
        get(SP), f64load,
        at(COL, SI), f64load, get(Y), [0xa2], [0xa1], // f64.mul, f64.sub
        f64store,
        [0x0b],
        get(K), i32c(1), ADD, set(K),
        br(0),
      ),
    ),
    0x0b,
  ];
}

function kernelModule(): Uint8Array {
  const body = [
    ...i32c(0),
    ...set(R),
    // blocks of 4 rows while 4 are left
    ...block(loop(get(R), i32c(4), ADD, get(ROWS), GT_S, brIf(1), blocks(4), get(R), i32c(4), ADD, set(R), br(0))),
    // then one row at a time
    ...block(loop(get(R), get(ROWS), GE_S, brIf(1), blocks(1), get(R), i32c(1), ADD, set(R), br(0))),
    0x0b,
  ];
  const locals = [...uleb(2), ...uleb(10), I32, ...uleb(11), V128];
  const code = [...uleb(locals.length + body.length), ...locals, ...body];
  const solve = solveBody();
  const solveLocals = [...uleb(3), ...uleb(4), I32, ...uleb(1), F64, ...uleb(1), V128];
  const solveCode = [...uleb(solveLocals.length + solve.length), ...solveLocals, ...solve];
  return Uint8Array.from([
    0x00, 0x61, 0x73, 0x6d, 0x01, 0x00, 0x00, 0x00,
    ...section(1, [2, 0x60, ...uleb(9), ...new Array<number>(9).fill(I32), 0, 0x60, ...uleb(3), I32, I32, I32, 0]),
    ...section(2, [1, ...str('env'), ...str('memory'), 0x02, 0x00, 0x01]),
    ...section(3, [2, 0, 1]),
    ...section(7, [2, ...str('dense'), 0x00, 0, ...str('solve'), 0x00, 1]),
    ...section(10, [2, ...code, ...solveCode]),
  ]);
}

// The WebAssembly global, typed for what is used here (the project's lib settings carry no DOM types).
interface WasmModule {
  readonly kind?: never;
}
interface WasmMemory {
  readonly buffer: ArrayBuffer;
  grow(pages: number): number;
}
interface WasmApi {
  validate(bytes: Uint8Array): boolean;
  Module: new (bytes: Uint8Array) => WasmModule;
  Instance: new (module: WasmModule, imports: Record<string, Record<string, unknown>>) => { exports: Record<string, unknown> };
  Memory: new (descriptor: { initial: number }) => WasmMemory;
}
const wasm = (globalThis as unknown as { WebAssembly?: WasmApi }).WebAssembly;

type Kernel = (x: number, xs: number, n: number, w: number, b: number, out: number, os: number, rows: number, blocks: number) => void;

let compiled: WasmModule | null | undefined;
/** The compiled kernel module, or null where WebAssembly SIMD is not available. */
function kernel(): WasmModule | null {
  if (compiled === undefined) {
    try {
      const bytes = kernelModule();
      compiled = wasm?.validate(bytes) ? new wasm.Module(bytes) : null;
    } catch {
      compiled = null;
    }
  }
  return compiled;
}

export const wasmKernelAvailable = (): boolean => kernel() !== null;

const PAGE = 65536;
const align16 = (bytes: number): number => Math.ceil(bytes / 16) * 16;

interface Placed {
  layer: DenseLayer;
  blocks: number;
  /** Outputs padded to whole blocks of 4: the row stride of this layer's output. */
  stride: number;
  w: number;
  b: number;
}

/**
 * The forward pass of network.ts on the WebAssembly kernel, the same to the last bit; null where
 * WebAssembly SIMD is not available (the caller falls back to the JavaScript kernel). Weights are
 * packed once, per block of 4 outputs and per input, as W[o..o+3, i]; activations run on the
 * kernel's output in place.
 */
export function createWasmForwardPass(net: Network, initialRows = 64): ForwardPass | null {
  checkNetworkShapes(net);
  const module = kernel();
  if (!module || !wasm) return null;
  const memory = new wasm.Memory({ initial: 1 });
  const dense = new wasm.Instance(module, { env: { memory } }).exports.dense as Kernel;

  let top = 0;
  const placed: Placed[] = net.layers.map((layer) => {
    const blocks = Math.ceil(layer.outputs / 4);
    const w = top;
    top = align16(top + blocks * layer.inputs * 32);
    const b = top;
    top = align16(top + blocks * 32);
    return { layer, blocks, stride: blocks * 4, w, b };
  });
  const weightBytes = top;
  const grow = (bytes: number): void => {
    const more = Math.ceil((bytes - memory.buffer.byteLength) / PAGE);
    if (more > 0) memory.grow(more);
  };
  grow(weightBytes);
  {
    const f = new Float64Array(memory.buffer);
    for (const p of placed) {
      const { inputs: n, outputs: m, weights, bias } = p.layer;
      for (let blk = 0; blk < p.blocks; blk++) {
        for (let q = 0; q < 4; q++) {
          const o = blk * 4 + q;
          if (o >= m) continue;
          f[p.b / 8 + o] = bias[o] as number;
          for (let i = 0; i < n; i++) f[p.w / 8 + (blk * n + i) * 4 + q] = weights[o * n + i] as number;
        }
      }
    }
  }

  const first = net.layers[0] as DenseLayer;
  const last = placed[placed.length - 1] as Placed;
  let capacity = 0;
  let inputAt = 0;
  let outAt: number[] = [];
  let views: { input: Float64Array; outs: Float64Array[] } = { input: new Float64Array(0), outs: [] };
  let logits = new Float64Array(0);
  let hiddenCopy = new Float64Array(0);
  const ensure = (rows: number): void => {
    if (rows <= capacity) return;
    capacity = Math.max(rows, capacity * 2, initialRows);
    let at = weightBytes;
    inputAt = at;
    at = align16(at + capacity * first.inputs * 8);
    outAt = placed.map((p) => {
      const start = at;
      at = align16(at + capacity * p.stride * 8);
      return start;
    });
    grow(at);
    views = {
      input: new Float64Array(memory.buffer, inputAt, capacity * first.inputs),
      outs: placed.map((p, l) => new Float64Array(memory.buffer, outAt[l] as number, capacity * p.stride)),
    };
    logits = new Float64Array(capacity * last.layer.outputs);
    const penultimate = placed[placed.length - 2];
    hiddenCopy = penultimate && penultimate.stride !== penultimate.layer.outputs ? new Float64Array(capacity * penultimate.layer.outputs) : hiddenCopy;
  };
  /** rows x outputs of a padded output, as a dense rows x outputs array. */
  const compact = (padded: Float64Array, rows: number, p: Placed, into: Float64Array): Float64Array => {
    const m = p.layer.outputs;
    if (p.stride === m) return padded.subarray(0, rows * m);
    for (let r = 0; r < rows; r++) into.set(padded.subarray(r * p.stride, r * p.stride + m), r * m);
    return into.subarray(0, rows * m);
  };

  return {
    run(x, rows) {
      ensure(rows);
      const n0 = first.inputs;
      views.input.set(x.subarray(0, rows * n0));
      let inPtr = inputAt;
      let inStride = n0;
      placed.forEach((p, l) => {
        const out = outAt[l] as number;
        dense(inPtr, inStride * 8, p.layer.inputs, p.w, p.b, out, p.stride * 8, rows, p.blocks);
        activateInPlace(p.layer.activation as ActivationName, p.layer.alpha, views.outs[l] as Float64Array, 0, rows * p.stride);
        inPtr = out;
        inStride = p.stride;
      });
      const L = placed.length;
      const hidden = L >= 2 ? compact(views.outs[L - 2] as Float64Array, rows, placed[L - 2] as Placed, hiddenCopy) : x.subarray(0, rows * n0);
      return { logits: compact(views.outs[L - 1] as Float64Array, rows, last, logits), hidden };
    },
  };
}

/** The WebAssembly pass where it can run, else the JavaScript one: the same results either way. */
export function createFastForwardPass(net: Network, initialRows = 64): ForwardPass {
  return createWasmForwardPass(net, initialRows) ?? createForwardPass(net, initialRows);
}

/** Below this size the JavaScript substitution is as fast as a call into the kernel. */
export const WASM_SOLVE_MIN = 32;

/**
 * Forward substitution with a lower-triangular L (row-major n x n) on the WebAssembly kernel:
 * solve(v, vOffset, out) writes y with L y = v[vOffset ..] into out, with the same bits as
 * linalg.ts's row-by-row loop. Null where WebAssembly SIMD is not available.
 */
export function createWasmSolver(l: ArrayLike<number>, n: number): ((v: ArrayLike<number>, vOffset: number, out: Float64Array) => void) | null {
  const module = kernel();
  if (!module || !wasm) return null;
  const memory = new wasm.Memory({ initial: Math.max(1, Math.ceil((n * n * 8 + n * 8 + 16) / PAGE)) });
  const solve = new wasm.Instance(module, { env: { memory } }).exports.solve as (lt: number, out: number, n: number) => void;
  const lt = new Float64Array(memory.buffer, 0, n * n);
  for (let i = 0; i < n; i++) for (let k = 0; k <= i; k++) lt[k * n + i] = l[i * n + k] as number;
  const outAt = align16(n * n * 8);
  const work = new Float64Array(memory.buffer, outAt, n);
  return (v, vOffset, out) => {
    for (let i = 0; i < n; i++) work[i] = v[vOffset + i] as number;
    solve(0, outAt, n);
    out.set(work.subarray(0, n));
  };
}
