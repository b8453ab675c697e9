import { describe, expect, it } from 'vitest';
import { createRng, deriveSeed, shuffleInPlace } from '../../src/core/rng.js';

describe('seeded random numbers', () => {
  it('repeat exactly for the same seed and differ for another', () => {
    const a = createRng(42);
    const b = createRng(42);
    const c = createRng(43);
    const xs = Array.from({ length: 5 }, () => a.next());
    expect(Array.from({ length: 5 }, () => b.next())).toEqual(xs);
    expect(Array.from({ length: 5 }, () => c.next())).not.toEqual(xs);
  });

  it('are uniform: chi-square over 10 cells below the 0.1% critical value for 9 df (27.877, NIST/SEMATECH e-Handbook 1.3.6.7.4)', () => {
    const rng = createRng(2026);
    const n = 100_000;
    const cells = new Array<number>(10).fill(0);
    for (let i = 0; i < n; i++) cells[rng.int(10)]!++;
    const expected = n / 10;
    const chi2 = cells.reduce((s, o) => s + (o - expected) ** 2 / expected, 0);
    expect(chi2).toBeLessThan(27.877);
  });

  it('give standard normal deviates: mean 0 and variance 1 within sampling error', () => {
    const rng = createRng(5);
    const n = 200_000;
    let s = 0;
    let s2 = 0;
    for (let i = 0; i < n; i++) {
      const z = rng.normal();
      s += z;
      s2 += z * z;
    }
    // standard errors: 1/sqrt(n) = 0.0022 for the mean, sqrt(2/n) = 0.0032 for the variance; allow 5 of them
    expect(Math.abs(s / n)).toBeLessThan(0.011);
    expect(Math.abs(s2 / n - 1)).toBeLessThan(0.016);
  });

  it('refuse a seed that is not a 32-bit unsigned integer', () => {
    expect(() => createRng(-1)).toThrow(/seed/);
    expect(() => createRng(1.5)).toThrow(/seed/);
  });

  it('shuffle into a permutation of the input', () => {
    const items = Array.from({ length: 50 }, (_, i) => i);
    const shuffled = shuffleInPlace([...items], createRng(1));
    expect(shuffled).not.toEqual(items);
    expect([...shuffled].sort((a, b) => a - b)).toEqual(items);
  });

  it('derive distinct streams from one seed', () => {
    expect(new Set([deriveSeed(1, 0), deriveSeed(1, 1), deriveSeed(1, 2), deriveSeed(2, 1)]).size).toBe(4);
  });
});
