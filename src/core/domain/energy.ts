import { logSumExp } from '../softmax.js';

/**
 * Energy score E(x) = -T log sum_k exp(z_k / T) of the logits z (Liu et al. 2020, "Energy-based
 * out-of-distribution detection", NeurIPS): lower on data like the training set, higher off it.
 * A ReLU network far from the data grows its logits, which drives E down again, so energy alone
 * misses far-away points; the other detectors catch those.
 */
export function energyScore(logits: ArrayLike<number>, offset: number, classes: number, temperature: number): number {
  return -temperature * logSumExp(logits, offset, classes, 1 / temperature);
}
