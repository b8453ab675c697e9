import { uleb, I32, V128, get, set, i32c, ADD, MUL, GE_S, GT_S, block, loop, br, brIf, vload, vstore, FMUL, F64, f64load, f64store, tee, FSUB, at } from './assembler.js';

// solve(lt, out, n): forward substitution by columns over L^T (row-major, so that a column of L
// is contiguous). out holds v on entry and y on return: for each k, y_k = out[k] / L[k,k], then
// out[i] = out[i] - L[i,k] * y_k for i > k, two lanes at a time. Each out[i] takes its terms in
// order of k, as in the row-by-row definition, so the bits are the same as linalg.ts's.

const [LT, SOUT, SN] = [0, 1, 2];
const [K, SI, COL, SP, Y, VY] = [3, 4, 5, 6, 7, 8];

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

/** The solve function's code entry: its locals and body. */
export function solveCode(): number[] {
  const body = solveBody();
  const locals = [...uleb(3), ...uleb(4), I32, ...uleb(1), F64, ...uleb(1), V128];
  return [...uleb(locals.length + body.length), ...locals, ...body];
}
