import { describe, expect, it } from 'vitest';
import { forwardSubstitute, inverseQuadraticForm } from '../../src/core/linalg.js';

// The substitutions against their definition, written here row by row:
// y_i = (v_i - L[i,0] y_0 - L[i,1] y_1 - ... - L[i,i-1] y_{i-1}) / L[i,i], terms in order of k.
// The same bits are required: the domain detectors' thresholds were calibrated with this arithmetic.

let seed = 4242;
const rand = (): number => {
  seed = (seed * 1103515245 + 12345) % 2147483648;
  return seed / 2147483648 - 0.5;
};

function lowerTriangular(n: number): Float64Array {
  const l = new Float64Array(n * n);
  for (let i = 0; i < n; i++) {
    for (let k = 0; k < i; k++) l[i * n + k] = rand();
    l[i * n + i] = 0.5 + Math.abs(rand()) * 3;
  }
  return l;
}

function byRows(l: Float64Array, n: number, v: ArrayLike<number>, offset: number): { y: Float64Array; squares: number } {
  const y = new Float64Array(n);
  let squares = 0;
  for (let i = 0; i < n; i++) {
    let s = v[offset + i] as number;
    for (let k = 0; k < i; k++) s -= (l[i * n + k] as number) * (y[k] as number);
    y[i] = s / (l[i * n + i] as number);
    squares += (y[i] as number) * (y[i] as number);
  }
  return { y, squares };
}

describe('forward substitution', () => {
  it('gives the same bits as the row-by-row definition, for every size up to a 256-wide layer', () => {
    for (const n of [1, 2, 3, 7, 16, 64, 255, 256]) {
      const l = lowerTriangular(n);
      for (let trial = 0; trial < 3; trial++) {
        const offset = trial;
        const v = Float64Array.from({ length: n + offset }, () => rand() * 100);
        const want = byRows(l, n, v, offset);
        const got = forwardSubstitute(l, n, v, new Float64Array(n), offset);
        for (let i = 0; i < n; i++) if (!Object.is(got[i], want.y[i])) expect.fail(`n ${n}: y[${i}] is ${got[i]}, the definition gives ${want.y[i]}`);
        const plain = v.subarray(offset);
        expect(Object.is(inverseQuadraticForm(l, n, plain), byRows(l, n, plain, 0).squares), `n ${n}: ||L^-1 v||^2`).toBe(true);
      }
    }
  });

  it('solves L y = v (checked by multiplying back)', () => {
    const n = 5;
    const l = lowerTriangular(n);
    const v = Float64Array.from({ length: n }, rand);
    const y = forwardSubstitute(l, n, v, new Float64Array(n));
    for (let i = 0; i < n; i++) {
      let s = 0;
      for (let k = 0; k <= i; k++) s += (l[i * n + k] as number) * (y[k] as number);
      expect(s).toBeCloseTo(v[i] as number, 12);
    }
  });
});
