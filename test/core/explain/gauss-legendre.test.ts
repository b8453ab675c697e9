import { describe, expect, it } from 'vitest';
import { gaussLegendre } from '../../../src/core/explain/gauss-legendre.js';

describe('gaussLegendre', () => {
  // Closed forms on [-1, 1]: n = 2, nodes +-1/sqrt(3), weights 1; n = 3, nodes 0 and
  // +-sqrt(3/5), weights 8/9 and 5/9 (the roots of P_2 = (3x^2 - 1)/2 and P_3 = (5x^3 - 3x)/2).
  // On [0, 1]: t = (1 + x) / 2 and half the weight.
  it('gives the closed-form two- and three-point rules', () => {
    const two = gaussLegendre(2);
    expect(two.nodes[0]).toBeCloseTo((1 - 1 / Math.sqrt(3)) / 2, 15);
    expect(two.nodes[1]).toBeCloseTo((1 + 1 / Math.sqrt(3)) / 2, 15);
    expect(two.weights[0]).toBeCloseTo(0.5, 15);
    const three = gaussLegendre(3);
    expect(three.nodes[0]).toBeCloseTo((1 - Math.sqrt(3 / 5)) / 2, 15);
    expect(three.nodes[1]).toBe(0.5);
    expect(three.weights[0]).toBeCloseTo(5 / 18, 15);
    expect(three.weights[1]).toBeCloseTo(8 / 18, 15);
  });

  it('integrates every power up to 2n - 1 exactly, and not 2n', () => {
    for (const n of [1, 4, 7, 16, 64]) {
      const { nodes, weights } = gaussLegendre(n);
      const integrate = (k: number): number => nodes.reduce((s, t, i) => s + (weights[i] as number) * t ** k, 0);
      for (let k = 0; k <= 2 * n - 1; k += Math.max(1, Math.floor(n / 4))) expect(Math.abs(integrate(k) - 1 / (k + 1))).toBeLessThan(1e-14);
      // The error on t^2n is n!^4 / ((2n + 1) (2n)!^2) (from memory): visible for small n only.
      if (n <= 4) expect(Math.abs(integrate(2 * n) - 1 / (2 * n + 1))).toBeGreaterThan(1e-6);
    }
  });

  it('converges geometrically on an analytic integrand: integral of cos over [0, 1] is sin 1', () => {
    const err = (n: number): number => {
      const { nodes, weights } = gaussLegendre(n);
      return Math.abs(nodes.reduce((s, t, i) => s + (weights[i] as number) * Math.cos(t), 0) - Math.sin(1));
    };
    expect(err(2)).toBeGreaterThan(err(3));
    expect(err(6)).toBeLessThan(1e-13);
  });

  it('refuses a rule of no points', () => {
    expect(() => gaussLegendre(0)).toThrow(/n >= 1/);
  });
});
