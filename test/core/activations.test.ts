import { describe, expect, it } from 'vitest';
import { type ActivationName, ACTIVATIONS, activateInPlace, multiplyByDerivative, sigmoid, softplus } from '../../src/core/activations.js';

const apply = (name: ActivationName, x: number, alpha = 0): number => {
  const a = Float64Array.of(x);
  activateInPlace(name, alpha, a);
  return a[0] as number;
};

describe('activations', () => {
  it('take their textbook values', () => {
    expect(apply('identity', -2.5)).toBe(-2.5);
    expect(apply('relu', -2)).toBe(0);
    expect(apply('relu', 3)).toBe(3);
    expect(apply('leaky_relu', -2, 0.01)).toBeCloseTo(-0.02, 15);
    expect(apply('elu', -1, 1)).toBeCloseTo(Math.exp(-1) - 1, 15);
    expect(apply('sigmoid', 0)).toBe(0.5);
    expect(apply('tanh', 0.5)).toBeCloseTo(Math.tanh(0.5), 15);
    expect(apply('sin', Math.PI / 2)).toBe(1);
    expect(apply('softplus', 0)).toBeCloseTo(Math.LN2, 15);
  });

  it('gives exact GELU, x Phi(x): Phi(1) = 0.8413 and Phi(1.96) = 0.9750 in the NIST/SEMATECH e-Handbook normal table (1.3.6.7.1); the full digits are from memory', () => {
    expect(apply('gelu', 1)).toBeCloseTo(0.8413447460685429, 14);
    expect(apply('gelu', -1)).toBeCloseTo(-(1 - 0.8413447460685429), 14);
    expect(apply('gelu', 1.96)).toBeCloseTo(1.96 * 0.9750021048517795, 12);
  });

  it('stay finite for extreme inputs', () => {
    expect(sigmoid(-1000)).toBe(0);
    expect(sigmoid(1000)).toBe(1);
    expect(softplus(1000)).toBe(1000);
    expect(softplus(-1000)).toBeGreaterThanOrEqual(0);
  });

  it('have derivatives that match central finite differences (common practice)', () => {
    const xs = [-2.3, -0.7, -0.01, 0.013, 0.4, 1.9];
    const h = 1e-6;
    for (const name of ACTIVATIONS) {
      const alpha = name === 'leaky_relu' ? 0.05 : name === 'elu' ? 1.3 : 0;
      for (const x of xs) {
        const pre = Float64Array.of(x);
        const post = Float64Array.of(apply(name, x, alpha));
        const g = Float64Array.of(1);
        multiplyByDerivative(name, alpha, pre, post, g);
        const numeric = (apply(name, x + h, alpha) - apply(name, x - h, alpha)) / (2 * h);
        expect(g[0], `${name}'(${x})`).toBeCloseTo(numeric, 6);
      }
    }
  });
});
