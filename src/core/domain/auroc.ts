/**
 * Area under the ROC curve for telling `positive` scores (out of domain) from `negative` ones
 * (held-out in-domain): P(score of a positive > score of a negative) + P(equal) / 2, the
 * Mann-Whitney U statistic divided by n_pos n_neg (Hanley & McNeil 1982, Radiology).
 */
export function auroc(negative: ArrayLike<number>, positive: ArrayLike<number>): number {
  const nNeg = negative.length;
  const nPos = positive.length;
  if (nNeg === 0 || nPos === 0) return Number.NaN;
  const all = [...Array.from(negative, (v) => [v, 0] as const), ...Array.from(positive, (v) => [v, 1] as const)].sort((a, b) => a[0] - b[0]);
  // Sum of the positives' mid-ranks.
  let rankSum = 0;
  for (let i = 0; i < all.length; ) {
    let j = i;
    while (j + 1 < all.length && (all[j + 1] as readonly [number, number])[0] === (all[i] as readonly [number, number])[0]) j++;
    const mid = (i + j) / 2 + 1;
    for (let k = i; k <= j; k++) if ((all[k] as readonly [number, number])[1] === 1) rankSum += mid;
    i = j + 1;
  }
  return (rankSum - (nPos * (nPos + 1)) / 2) / (nPos * nNeg);
}
