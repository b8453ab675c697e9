/**
 * Two-sample Kolmogorov-Smirnov statistic D = sup_x |F_a(x) - F_b(x)| of two samples, given
 * sorted, and the integer h = D m n that the exact distribution is indexed by.
 */
export function ksStatistic(a: ArrayLike<number>, b: ArrayLike<number>): { d: number; h: number } {
  const m = a.length;
  const n = b.length;
  let i = 0;
  let j = 0;
  let h = 0;
  while (i < m || j < n) {
    // Step past every copy of the next value in both samples, so that ties move together.
    const x = Math.min(i < m ? (a[i] as number) : Infinity, j < n ? (b[j] as number) : Infinity);
    while (i < m && (a[i] as number) === x) i++;
    while (j < n && (b[j] as number) === x) j++;
    h = Math.max(h, Math.abs(i * n - j * m));
  }
  return { d: m > 0 && n > 0 ? h / (m * n) : 0, h };
}

/**
 * Limiting Kolmogorov distribution, P(K > x) = 2 sum_{k>=1} (-1)^(k-1) exp(-2 k^2 x^2)
 * (Kolmogorov 1933; Smirnov 1948), the asymptotic p-value at x = sqrt(m n / (m + n)) D.
 */
export function kolmogorovSurvival(x: number): number {
  if (x <= 0) return 1;
  if (x < 0.2) return 1; // the series needs many terms here and the value is 1 to 15 digits
  let sum = 0;
  for (let k = 1; k <= 100; k++) {
    const term = Math.exp(-2 * k * k * x * x);
    sum += (k % 2 === 1 ? 1 : -1) * term;
    if (term < 1e-17) break;
  }
  return Math.min(1, Math.max(0, 2 * sum));
}

/**
 * Exact two-sided p-value P(D >= h / (m n)) under H0 for continuous data, by the lattice-path
 * recursion (Hodges 1958): A(i, j) = (i A(i-1, j) + j A(i, j-1)) / (i + j) over the cells with
 * |i n - j m| < h, A(0, 0) = 1, is the probability that a random path stays inside the band, and
 * p = 1 - A(m, n). Only the band is visited, O(m n D) work; precision is absolute, about 1e-15.
 */
export function ksExactPValue(m: number, n: number, h: number): number {
  if (h <= 0) return 1;
  let prev = new Float64Array(n + 1);
  let cur = new Float64Array(n + 1);
  const inside = (i: number, j: number): boolean => Math.abs(i * n - j * m) < h;
  // row i = 0
  prev[0] = 1;
  let prevLo = 0;
  let prevHi = 0;
  for (let j = 1; j <= n && inside(0, j); j++) {
    prev[j] = prev[j - 1] as number;
    prevHi = j;
  }
  for (let i = 1; i <= m; i++) {
    // j with |i n - j m| < h: (i n - h) / m < j < (i n + h) / m
    const lo = Math.max(0, Math.floor((i * n - h) / m) + 1);
    const hi = Math.min(n, Math.ceil((i * n + h) / m) - 1);
    if (lo > hi) return 1;
    for (let j = lo; j <= hi; j++) {
      const up = j >= prevLo && j <= prevHi ? (prev[j] as number) : 0;
      const left = j - 1 >= lo ? (cur[j - 1] as number) : 0;
      cur[j] = (i * up + j * left) / (i + j);
    }
    const swap = prev;
    prev = cur;
    cur = swap;
    prevLo = lo;
    prevHi = hi;
  }
  const a = prevHi >= n && prevLo <= n ? (prev[n] as number) : 0;
  return Math.min(1, Math.max(0, 1 - a));
}

export interface KsResult {
  d: number;
  p_value: number;
  method: 'exact' | 'asymptotic';
}

/** Largest sample size of either side for which the p-value is exact (as scipy's ks_2samp 'auto'). */
export const KS_EXACT_MAX = 10_000;

/**
 * Two-sample KS test on sorted samples: the exact p-value while both samples have at most
 * KS_EXACT_MAX values and the asymptotic one is above 1e-12 (below it the exact recursion would
 * only give 0 to its precision), else the limiting distribution at the effective n = m n / (m + n).
 */
export function ksTest(a: ArrayLike<number>, b: ArrayLike<number>): KsResult {
  const m = a.length;
  const n = b.length;
  const { d, h } = ksStatistic(a, b);
  const asymptotic = kolmogorovSurvival(Math.sqrt((m * n) / (m + n)) * d);
  if (m <= KS_EXACT_MAX && n <= KS_EXACT_MAX && asymptotic > 1e-12) return { d, p_value: ksExactPValue(m, n, h), method: 'exact' };
  return { d, p_value: asymptotic, method: 'asymptotic' };
}
