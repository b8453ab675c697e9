/**
 * Ledoit-Wolf shrinkage covariance (Ledoit & Wolf 2004, "A well-conditioned estimator for
 * large-dimensional covariance matrices", J. Multivariate Analysis 88, lemma 3.2 / theorem 3.2):
 * (1 - s) S + s mu I, with S the empirical covariance (divided by n), mu = trace(S) / p and the
 * shrinkage s estimated from the data, clipped to [0, 1]. Written as scikit-learn's
 * ledoit_wolf_shrinkage computes it, which test/fixtures/make-domain-fixtures.py checks against.
 * Rows are centred on their mean first. A constant column only adds shrinkage; the result stays
 * positive definite unless every column is constant, in which case the identity is returned.
 */
export function ledoitWolf(x: Float64Array, n: number, p: number): { mean: Float64Array; covariance: Float64Array; shrinkage: number } {
  const mean = new Float64Array(p);
  for (let i = 0; i < n; i++) for (let j = 0; j < p; j++) mean[j] = (mean[j] as number) + (x[i * p + j] as number) / n;
  return { mean, ...ledoitWolfCentred(x, n, p, mean) };
}

/** As ledoitWolf, for rows already centred by `center` (a per-row center is allowed through centerOf). */
export function ledoitWolfCentred(
  x: Float64Array,
  n: number,
  p: number,
  center: ArrayLike<number>,
  centerOf: (row: number) => ArrayLike<number> = () => center,
): { covariance: Float64Array; shrinkage: number } {
  const s = new Float64Array(p * p); // sum x x^T, then S
  const s2 = new Float64Array(p * p); // sum (x^2)(x^2)^T
  const v = new Float64Array(p);
  for (let i = 0; i < n; i++) {
    const c = centerOf(i);
    for (let j = 0; j < p; j++) v[j] = (x[i * p + j] as number) - (c[j] as number);
    for (let a = 0; a < p; a++) {
      const va = v[a] as number;
      if (va === 0) continue;
      const va2 = va * va;
      for (let b = 0; b < p; b++) {
        const vb = v[b] as number;
        s[a * p + b] = (s[a * p + b] as number) + va * vb;
        s2[a * p + b] = (s2[a * p + b] as number) + va2 * vb * vb;
      }
    }
  }
  let trace = 0;
  for (let k = 0; k < p * p; k++) s[k] = (s[k] as number) / n;
  for (let j = 0; j < p; j++) trace += s[j * p + j] as number;
  const mu = trace / p;
  if (!(mu > 0)) {
    const identity = new Float64Array(p * p);
    for (let j = 0; j < p; j++) identity[j * p + j] = 1;
    return { covariance: identity, shrinkage: 1 };
  }
  // delta_ = ||S||_F^2 ; beta_ = sum of (x^2)(x^2)^T over rows; see sklearn.covariance.ledoit_wolf_shrinkage
  let frob = 0;
  let sumS2 = 0;
  for (let k = 0; k < p * p; k++) {
    frob += (s[k] as number) ** 2;
    sumS2 += s2[k] as number;
  }
  const beta = (sumS2 / n - frob) / (p * n);
  const delta = (frob - 2 * mu * trace + p * mu * mu) / p;
  const shrinkage = delta === 0 ? 0 : Math.min(beta, delta) / delta;
  const covariance = new Float64Array(p * p);
  for (let a = 0; a < p; a++) {
    for (let b = 0; b < p; b++) covariance[a * p + b] = (1 - shrinkage) * (s[a * p + b] as number) + (a === b ? shrinkage * mu : 0);
  }
  return { covariance, shrinkage };
}
