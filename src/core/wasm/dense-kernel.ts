import { uleb, I32, V128, get, set, i32c, ADD, MUL, GE_S, GT_S, EQZ, SUB, block, loop, br, brIf, vload, vstore, loadSplat, FADD, FMUL, FPMAX } from './assembler.js';

// The dense layer on WebAssembly SIMD: two float64 lanes per instruction, blocks of 4 rows x 4
// outputs in registers. Each sum starts at b[o] and adds x[r,i] * W[o,i] in order of i with a
// multiply and then an add (WebAssembly never fuses them), so every result has the same bits as
// the plain loop in network.ts.

// dense(x, xs, n, w, b, out, os, rows, blocks): addresses and strides in bytes.
const [X, XS, N, W, B, OUT, OS, ROWS, BLOCKS] = [0, 1, 2, 3, 4, 5, 6, 7, 8];
const [R, BLK, I, WP, P0, P1, P2, P3, OP, BP] = [9, 10, 11, 12, 13, 14, 15, 16, 17, 18];
const ACC = [19, 20, 21, 22, 23, 24, 25, 26]; // rows 0..3, each outputs 0-1 and 2-3
const [WA, WB, V] = [27, 28, 29];
/** Never set: WebAssembly locals start at zero. */
const ZERO = 30;
const PTR = [P0, P1, P2, P3];

/**
 * With relu, each sum is stored as pmax(sum, 0) = sum < 0 ? 0 : sum: the JavaScript loop's
 * `if (v < 0) v = 0` to the bit (a NaN stays NaN, -0 stays -0), where a max instruction would
 * turn -0 into +0.
 */
const stored = (acc: number, relu: boolean): number[] => (relu ? [...get(acc), ...get(ZERO), ...FPMAX] : get(acc));

/** One pass over the 4-output blocks for `lanes` rows starting at row R. */
function blocks(lanes: number, relu: boolean): number[] {
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
          ...get(OP), ...stored(acc(k, 0), relu), ...vstore(0),
          ...get(OP), ...stored(acc(k, 1), relu), ...vstore(16),
          ...get(OP), ...get(OS), ...ADD, ...set(OP),
        ]),
        get(BLK), i32c(1), ADD, set(BLK),
        br(0),
      ),
    ),
  ];
}

/** The dense function's code entry: its locals and body; with relu, the activation fused in. */
export function denseCode(relu = false): number[] {
  const body = [
    ...i32c(0),
    ...set(R),
    // blocks of 4 rows while 4 are left
    ...block(loop(get(R), i32c(4), ADD, get(ROWS), GT_S, brIf(1), blocks(4, relu), get(R), i32c(4), ADD, set(R), br(0))),
    // then one row at a time
    ...block(loop(get(R), get(ROWS), GE_S, brIf(1), blocks(1, relu), get(R), i32c(1), ADD, set(R), br(0))),
    0x0b,
  ];
  const locals = [...uleb(2), ...uleb(10), I32, ...uleb(12), V128];
  return [...uleb(locals.length + body.length), ...locals, ...body];
}
