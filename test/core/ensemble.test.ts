import { describe, expect, it } from 'vitest';
import { disagreementScores, ensembleProbabilitiesInto, memberForRow } from '../../src/core/ensemble.js';
import { createRng } from '../../src/core/rng.js';
import { softmax } from '../../src/core/softmax.js';

describe('ensemble probabilities', () => {
  it('are the mean of the members\' softmax at the temperature, and one member\'s own when alone', () => {
    const a = Float64Array.of(1, 2, 0, -1, 0, 3);
    const b = Float64Array.of(0, 0, 0, 2, 1, 0);
    const probs = [new Float64Array(6), new Float64Array(6)];
    const mean = new Float64Array(6);
    ensembleProbabilitiesInto([a, b], 2, 3, 2, probs, mean);
    const expected = [0, 1].flatMap((r) => {
      const pa = softmax(a.subarray(r * 3, r * 3 + 3), 2);
      const pb = softmax(b.subarray(r * 3, r * 3 + 3), 2);
      return [0, 1, 2].map((k) => ((pa[k] as number) + (pb[k] as number)) / 2);
    });
    expected.forEach((v, i) => expect(mean[i]).toBeCloseTo(v, 15));
    ensembleProbabilitiesInto([a], 2, 3, 2, probs, mean);
    expect(Array.from(mean)).toEqual(Array.from(probs[0]!));
  });
});

describe('disagreement', () => {
  it('is log 2 for two members certain of different classes, 0 for members that agree', () => {
    const p = Float64Array.of(1, 0, 0.3, 0.7);
    const q = Float64Array.of(0, 1, 0.3, 0.7);
    const mean = Float64Array.of(0.5, 0.5, 0.3, 0.7);
    const d = disagreementScores([p, q], mean, 2, 2);
    expect(d[0]).toBeCloseTo(Math.LN2, 15);
    expect(d[1]).toBe(0);
  });

  it('equals the entropy of the mean minus the members\' mean entropy (the identity of the mutual information)', () => {
    const rng = createRng(5);
    const M = 5;
    const K = 4;
    const members = Array.from({ length: M }, () => softmax(Array.from({ length: K }, () => 3 * rng.normal())));
    const mean = Float64Array.from({ length: K }, (_, k) => members.reduce((s, p) => s + (p[k] as number), 0) / M);
    const entropy = (p: ArrayLike<number>): number => -Array.from(p).reduce((s, v) => s + (v > 0 ? v * Math.log(v) : 0), 0);
    const expected = entropy(mean) - members.reduce((s, p) => s + entropy(p), 0) / M;
    expect(disagreementScores(members, mean, 1, K)[0]).toBeCloseTo(expected, 14);
    expect(expected).toBeLessThanOrEqual(Math.log(M));
  });
});

describe('the member that checks a vector', () => {
  it('is the same for the same vector, is 0 with one member, and spreads vectors evenly over five', () => {
    const x = Float64Array.of(232.1, 53.8, 923, 478);
    expect(memberForRow(x, 0, 4, 5)).toBe(memberForRow(Float64Array.from(x), 0, 4, 5));
    expect(memberForRow(x, 0, 4, 1)).toBe(0);
    const rng = createRng(11);
    const counts = new Array(5).fill(0);
    const n = 10000;
    for (let i = 0; i < n; i++) counts[memberForRow(Float64Array.of(rng.normal(), rng.normal(), rng.normal()), 0, 3, 5)]++;
    // chi-square with 4 degrees of freedom: 13.28 is its 0.99 quantile (NIST/SEMATECH e-Handbook, table 1.3.6.7.4)
    const chi = counts.reduce((s, c) => s + (c - n / 5) ** 2 / (n / 5), 0);
    expect(chi).toBeLessThan(13.28);
  });
});
