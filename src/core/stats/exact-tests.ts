import { binomialUpperTail } from './proportion.js';

/** ln(k!) for k = 0..n, by summing logs: exact enough for the table sizes of a report, and no gamma function needed. */
function logFactorials(n: number): Float64Array {
  const out = new Float64Array(n + 1);
  for (let k = 2; k <= n; k++) out[k] = (out[k - 1] as number) + Math.log(k);
  return out;
}

/**
 * Fisher's exact test of a 2x2 table [[a, b], [c, d]], two-sided (Fisher 1935, The Design of
 * Experiments, ch. 2; the "sum of small p" rule of Agresti 1992, Statistical Science 7): with the
 * margins fixed, a is hypergeometric, and p is the total probability of the tables no more likely
 * than the one observed. Tables within a relative 1e-7 of it count as equally likely, as
 * scipy.stats.fisher_exact does, so that rounding does not drop a table of equal probability.
 */
export function fisherExactTwoSided(a: number, b: number, c: number, d: number): number {
  const r1 = a + b;
  const r2 = c + d;
  const c1 = a + c;
  const n = r1 + r2;
  if (n === 0 || r1 === 0 || r2 === 0 || c1 === 0 || c1 === n) return 1;
  const lf = logFactorials(n);
  const logP = (x: number): number =>
    (lf[r1] as number) - (lf[x] as number) - (lf[r1 - x] as number) + (lf[r2] as number) - (lf[c1 - x] as number) - (lf[r2 - c1 + x] as number) - ((lf[n] as number) - (lf[c1] as number) - (lf[n - c1] as number));
  const observed = logP(a);
  const limit = observed + Math.log1p(1e-7);
  let p = 0;
  for (let x = Math.max(0, c1 - r2); x <= Math.min(r1, c1); x++) {
    const lp = logP(x);
    if (lp <= limit) p += Math.exp(lp);
  }
  return Math.min(1, p);
}

/**
 * McNemar's test of paired answers in its exact form (McNemar 1947, Psychometrika 12): of the n =
 * b + c discordant pairs, b is Binomial(n, 1/2) when both answer alike often; two-sided p =
 * min(1, 2 P(X >= max(b, c))), the binomial tail by symmetry.
 */
export function mcnemarExact(b: number, c: number): number {
  const n = b + c;
  if (n === 0) return 1;
  return Math.min(1, 2 * binomialUpperTail(Math.max(b, c), n, 0.5));
}
