import { describe, expect, it } from 'vitest';
import { logSumExp, softmax, topTwo } from '../../src/core/softmax.js';

// Properties of softmax that hold by definition (facts of the trade).
describe('softmax', () => {
  const z = [1.5, -0.3, 2.2, 0.0, -4.1];

  it('sums to one', () => {
    const p = softmax(z);
    expect(p.reduce((a, b) => a + b, 0)).toBeCloseTo(1, 15);
  });

  it('is unchanged when a constant is added to every logit', () => {
    const p = softmax(z);
    const shifted = softmax(z.map((v) => v + 1234.5));
    shifted.forEach((v, i) => expect(v).toBeCloseTo(p[i] as number, 12));
  });

  it('keeps the argmax of the logits', () => {
    expect(topTwo(softmax(z)).index).toBe(2);
    expect(topTwo(softmax(z, 7)).index).toBe(2);
  });

  it('does not overflow at logits of 1e4', () => {
    const p = softmax([1e4, 1e4 - 1, -1e4]);
    expect(p.every(Number.isFinite)).toBe(true);
    // e^0 / (e^0 + e^-1) exactly, by the definition
    expect(p[0]).toBeCloseTo(1 / (1 + Math.exp(-1)), 14);
    expect(p[2]).toBe(0);
  });

  it('divides the logits by the temperature', () => {
    const hot = softmax([2, 0], 2);
    const plain = softmax([1, 0]);
    expect(hot[0]).toBeCloseTo(plain[0] as number, 15);
  });

  it('flattens towards uniform as the temperature grows and sharpens as it falls', () => {
    expect(topTwo(softmax(z, 1e6)).top).toBeCloseTo(1 / z.length, 5);
    expect(topTwo(softmax(z, 1e-3)).top).toBe(1);
  });

  it('refuses a temperature that is not positive', () => {
    expect(() => softmax(z, 0)).toThrow(/temperature/);
  });
});

describe('margin', () => {
  it('is the top probability minus the second', () => {
    const t = topTwo([0.1, 0.6, 0.3]);
    expect(t.index).toBe(1);
    expect(t.margin).toBeCloseTo(0.3, 15);
    expect(t.top).toBe(0.6);
  });

  it('is zero on a tie, which picks the first class', () => {
    const t = topTwo([0.4, 0.4, 0.2]);
    expect(t.index).toBe(0);
    expect(t.margin).toBe(0);
  });
});

describe('logSumExp', () => {
  it('equals log(sum(exp)) where that is representable and stays finite where it is not', () => {
    expect(logSumExp([1, 2, 3])).toBeCloseTo(Math.log(Math.exp(1) + Math.exp(2) + Math.exp(3)), 14);
    expect(logSumExp([1000, 1000])).toBeCloseTo(1000 + Math.LN2, 10);
  });
});
