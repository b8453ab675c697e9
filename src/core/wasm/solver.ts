import { PAGE, align16, instantiateKernel } from './module.js';

/** Below this size the JavaScript substitution is as fast as a call into the kernel. */
export const WASM_SOLVE_MIN = 32;

/**
 * Forward substitution with a lower-triangular L (row-major n x n) on the WebAssembly kernel:
 * solve(v, vOffset, out) writes y with L y = v[vOffset ..] into out, with the same bits as
 * linalg.ts's row-by-row loop. Null where WebAssembly SIMD is not available.
 */
export function createWasmSolver(l: ArrayLike<number>, n: number): ((v: ArrayLike<number>, vOffset: number, out: Float64Array) => void) | null {
  const kernel = instantiateKernel(Math.max(1, Math.ceil((n * n * 8 + n * 8 + 16) / PAGE)));
  if (!kernel) return null;
  const { memory, solve } = kernel;
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
