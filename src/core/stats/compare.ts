import gammainc from '@stdlib/math-base-special-gammainc';

/** Floor on a bin fraction in PSI, so that an empty bin gives a large but finite term (common practice). */
export const PSI_FLOOR = 1e-4;

/**
 * Population stability index, sum_i (a_i - e_i) ln(a_i / e_i) over bins, with a the window's and e
 * the reference's fractions, each floored at PSI_FLOOR (common practice, no single source).
 */
export function psi(actual: ArrayLike<number>, expected: ArrayLike<number>): number {
  let s = 0;
  for (let i = 0; i < actual.length; i++) {
    const a = Math.max(actual[i] as number, PSI_FLOOR);
    const e = Math.max(expected[i] as number, PSI_FLOOR);
    s += (a - e) * Math.log(a / e);
  }
  return s;
}

/** PSI bands (common practice): < 0.1 stable, 0.1 to 0.25 watch, >= 0.25 shifted. */
export function psiBand(value: number): 'stable' | 'watch' | 'shifted' {
  return value < 0.1 ? 'stable' : value < 0.25 ? 'watch' : 'shifted';
}

/**
 * Wasserstein-1 distance between two empirical distributions, the integral of |F_a - F_b|
 * (Vallender 1974), from sorted samples.
 */
export function wasserstein1(a: ArrayLike<number>, b: ArrayLike<number>): number {
  const m = a.length;
  const n = b.length;
  if (m === 0 || n === 0) return Number.NaN;
  let i = 0;
  let j = 0;
  let x = Math.min(a[0] as number, b[0] as number);
  let area = 0;
  while (i < m || j < n) {
    const next = Math.min(i < m ? (a[i] as number) : Infinity, j < n ? (b[j] as number) : Infinity);
    area += Math.abs(i / m - j / n) * (next - x);
    x = next;
    while (i < m && (a[i] as number) === x) i++;
    while (j < n && (b[j] as number) === x) j++;
  }
  return area;
}

/**
 * Jensen-Shannon distance in base 2, the square root of the divergence of Lin (1991, IEEE Trans.
 * Inf. Theory) between two distributions on the same classes: 0 for equal ones, 1 for disjoint.
 */
export function jensenShannonDistance(p: ArrayLike<number>, q: ArrayLike<number>): number {
  let div = 0;
  for (let k = 0; k < p.length; k++) {
    const a = p[k] as number;
    const b = q[k] as number;
    const m = (a + b) / 2;
    if (a > 0) div += 0.5 * a * Math.log2(a / m);
    if (b > 0) div += 0.5 * b * Math.log2(b / m);
  }
  return Math.sqrt(Math.max(0, div));
}

/**
 * Pearson's chi-square goodness of fit of observed counts to expected fractions (Pearson 1900):
 * statistic sum (O - E)^2 / E over categories with E > 0, df = their number - 1, and the p-value
 * from the chi-square distribution (@stdlib's regularized incomplete gamma).
 */
export function chiSquareGoodnessOfFit(observed: ArrayLike<number>, expectedFractions: ArrayLike<number>): { statistic: number; df: number; p_value: number } {
  let total = 0;
  for (let k = 0; k < observed.length; k++) total += observed[k] as number;
  let stat = 0;
  let cells = 0;
  let unexpected = false;
  for (let k = 0; k < observed.length; k++) {
    const e = (expectedFractions[k] as number) * total;
    if (e > 0) {
      stat += ((observed[k] as number) - e) ** 2 / e;
      cells++;
    } else if ((observed[k] as number) > 0) unexpected = true;
  }
  const df = Math.max(1, cells - 1);
  // A count where none was expected is impossible under the reference: p = 0.
  if (unexpected) return { statistic: Infinity, df, p_value: 0 };
  // Upper tail as the regularized upper incomplete gamma Q(df/2, x/2), not 1 - CDF, so that a
  // large statistic gives a small p-value rather than 0.
  return { statistic: stat, df, p_value: gammainc(stat / 2, df / 2, true, true) };
}

/**
 * Benjamini-Hochberg adjusted p-values (Benjamini & Hochberg 1995, JRSS B 57): for the i-th
 * smallest of m, min over j >= i of m p_(j) / j, capped at 1; rejecting where it is <= q controls
 * the false discovery rate at q.
 */
export function benjaminiHochberg(p: ArrayLike<number>): number[] {
  const m = p.length;
  const order = Array.from({ length: m }, (_, i) => i).sort((x, y) => (p[x] as number) - (p[y] as number));
  const out = new Array<number>(m);
  let running = 1;
  for (let r = m - 1; r >= 0; r--) {
    const i = order[r] as number;
    running = Math.min(running, ((p[i] as number) * m) / (r + 1));
    out[i] = running;
  }
  return out;
}
