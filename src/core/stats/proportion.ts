import betainc from '@stdlib/math-base-special-betainc';
import normalQuantile from '@stdlib/stats-base-dists-normal-quantile';
import betaQuantile from '@stdlib/stats-base-dists-beta-quantile';

/**
 * Wilson score interval for k successes in n trials (Wilson 1927, JASA; method 3 of Newcombe 1998,
 * Statistics in Medicine 17): (k + z^2/2 ± z sqrt(k (n - k) / n + z^2 / 4)) / (n + z^2). Stays
 * inside [0, 1] and is sensible at 0/n and n/n, where the Wald interval collapses.
 */
export function wilsonInterval(k: number, n: number, confidence = 0.95): { low: number; high: number } {
  if (n <= 0) return { low: 0, high: 1 };
  const z = normalQuantile(1 - (1 - confidence) / 2, 0, 1);
  const z2 = z * z;
  const centre = (k + z2 / 2) / (n + z2);
  const half = (z * Math.sqrt((k * (n - k)) / n + z2 / 4)) / (n + z2);
  return { low: k === 0 ? 0 : Math.max(0, centre - half), high: k === n ? 1 : Math.min(1, centre + half) };
}

/**
 * Exact one-sided binomial test: P(X >= k) for X ~ Binomial(n, p), as the regularized incomplete
 * beta function I_p(k, n - k + 1) (Abramowitz & Stegun 26.5.24), which keeps small tails that
 * 1 - CDF would round to 0.
 */
export function binomialUpperTail(k: number, n: number, p: number): number {
  if (k <= 0) return 1;
  if (k > n) return 0;
  if (p <= 0) return 0;
  if (p >= 1) return 1;
  return betainc(p, k, n - k + 1);
}

/**
 * Clopper–Pearson "exact" interval for k successes in n trials (Clopper & Pearson 1934,
 * Biometrika 26; method 5 of Newcombe 1998): the beta quantiles B(a/2; k, n - k + 1) and
 * B(1 - a/2; k + 1, n - k), 0 at k = 0 and 1 at k = n. Its coverage is at least the nominal one
 * for every true rate, which suits a false-alarm rate measured on a few hundred rows.
 */
export function clopperPearsonInterval(k: number, n: number, confidence = 0.95): { low: number; high: number } {
  if (!(n > 0)) return { low: 0, high: 1 };
  const a = (1 - confidence) / 2;
  return {
    low: k <= 0 ? 0 : betaQuantile(a, k, n - k + 1),
    high: k >= n ? 1 : betaQuantile(1 - a, k + 1, n - k),
  };
}
