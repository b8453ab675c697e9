// Small dense linear algebra on row-major Float64Array matrices, for the domain detectors.
import { WASM_SOLVE_MIN, createWasmSolver } from './wasm/solver.js';

/**
 * Cholesky factor L (lower triangular, row-major n x n) with A = L L^T, for a symmetric positive
 * definite A (Golub & Van Loan, Matrix Computations, algorithm 4.2.1). Throws when A is not
 * positive definite to working precision.
 */
export function cholesky(a: Float64Array, n: number): Float64Array {
  const l = new Float64Array(n * n);
  for (let j = 0; j < n; j++) {
    let d = a[j * n + j] as number;
    for (let k = 0; k < j; k++) d -= (l[j * n + k] as number) ** 2;
    if (!(d > 0)) throw new RangeError(`matrix is not positive definite (pivot ${j} is ${d})`);
    const ljj = Math.sqrt(d);
    l[j * n + j] = ljj;
    for (let i = j + 1; i < n; i++) {
      let s = a[i * n + j] as number;
      for (let k = 0; k < j; k++) s -= (l[i * n + k] as number) * (l[j * n + k] as number);
      l[i * n + j] = s / ljj;
    }
  }
  return l;
}

type Solver = (v: ArrayLike<number>, vOffset: number, out: Float64Array) => void;
/** One kernel solver per factor (a factor is never changed once made); null where there is none. */
const solvers = new WeakMap<ArrayLike<number>, Solver | null>();
function solverFor(l: ArrayLike<number>, n: number): Solver | null {
  if (n < WASM_SOLVE_MIN) return null;
  let s = solvers.get(l);
  if (s === undefined) {
    s = createWasmSolver(l, n);
    solvers.set(l, s);
  }
  return s;
}

/**
 * ||L^-1 v||^2 by forward substitution: with A = L L^T this is v^T A^-1 v, the squared
 * Mahalanobis distance when A is a covariance, without ever forming A^-1.
 */
export function inverseQuadraticForm(l: ArrayLike<number>, n: number, v: ArrayLike<number>, work: Float64Array = new Float64Array(n)): number {
  const solve = solverFor(l, n);
  if (solve) {
    solve(v, 0, work);
    let squares = 0;
    for (let i = 0; i < n; i++) squares += (work[i] as number) * (work[i] as number);
    return squares;
  }
  let sum = 0;
  for (let i = 0; i < n; i++) {
    let s = v[i] as number;
    const row = i * n;
    for (let k = 0; k < i; k++) s -= (l[row + k] as number) * (work[k] as number);
    const y = s / (l[row + i] as number);
    work[i] = y;
    sum += y * y;
  }
  return sum;
}

/**
 * Solves L y = v for lower-triangular L (forward substitution) into out. From WASM_SOLVE_MIN
 * rows on, on the WebAssembly kernel (wasm/solver.ts), which goes column by column and so does
 * not wait on one sum at a time, with the same operations in the same order for each y_i.
 */
export function forwardSubstitute(l: ArrayLike<number>, n: number, v: ArrayLike<number>, out: Float64Array, vOffset = 0): Float64Array {
  const solve = solverFor(l, n);
  if (solve) {
    solve(v, vOffset, out);
    return out;
  }
  for (let i = 0; i < n; i++) {
    let s = v[vOffset + i] as number;
    const row = i * n;
    for (let k = 0; k < i; k++) s -= (l[row + k] as number) * (out[k] as number);
    out[i] = s / (l[row + i] as number);
  }
  return out;
}
