import { describe, expect, it } from 'vitest';
import { type Network, checkNetworkShapes, createForwardPass, denseInto, forward, roundToFloat32 } from '../../src/core/network.js';

// A 2-3-2 network small enough to work by hand.
const net: Network = {
  layers: [
    {
      inputs: 2,
      outputs: 3,
      activation: 'relu',
      alpha: 0,
      weights: Float64Array.of(1, -1, 0.5, 2, -3, 1),
      bias: Float64Array.of(0, 1, -0.5),
    },
    {
      inputs: 3,
      outputs: 2,
      activation: 'identity',
      alpha: 0,
      weights: Float64Array.of(1, 1, 1, -1, 0, 2),
      bias: Float64Array.of(0.1, -0.1),
    },
  ],
};

describe('forward pass', () => {
  it('computes f(x W^T + b) layer by layer, as worked by hand', () => {
    // x = (2, 1): hidden pre = (2-1+0, 1+2+1, -6+1-0.5) = (1, 4, -5.5) -> relu (1, 4, 0)
    // logits = (1+4+0+0.1, -1+0+0-0.1) = (5.1, -1.1)
    const { logits, hidden } = forward(net, Float64Array.of(2, 1), 1);
    expect(Array.from(hidden)).toEqual([1, 4, 0]);
    expect(logits[0]).toBeCloseTo(5.1, 14);
    expect(logits[1]).toBeCloseTo(-1.1, 14);
  });

  it('scores a batch row by row, the same as one at a time', () => {
    const x = Float64Array.of(2, 1, -1, 0.5, 0, 0, 3, -2);
    const batch = forward(net, x, 4).logits;
    for (let r = 0; r < 4; r++) {
      const single = forward(net, x.subarray(r * 2, r * 2 + 2), 1).logits;
      expect(batch[r * 2]).toBe(single[0]);
      expect(batch[r * 2 + 1]).toBe(single[1]);
    }
  });

  it('reuses its buffers and grows them for a larger batch', () => {
    const pass = createForwardPass(net, 1);
    const a = pass.run(Float64Array.of(2, 1), 1).logits.slice();
    const b = pass.run(Float64Array.of(2, 1, 2, 1, 2, 1), 3).logits;
    expect(b.length).toBe(6);
    expect(Array.from(b.subarray(4, 6))).toEqual(Array.from(a));
  });

  it('refuses layers that do not chain', () => {
    const broken: Network = { layers: [net.layers[0]!, { ...net.layers[1]!, inputs: 4, weights: new Float64Array(8) }] };
    expect(() => checkNetworkShapes(broken)).toThrow(/layer 1: takes 4 inputs but layer 0 gives 3/);
  });

  it('rounds parameters to float32', () => {
    const r = roundToFloat32({ layers: [{ ...net.layers[0]!, weights: Float64Array.of(0.1, 0.2, 0.3, 0.4, 0.5, 0.6) }] });
    expect(r.layers[0]!.weights[0]).toBe(Math.fround(0.1));
    expect(r.layers[0]!.weights[0]).not.toBe(0.1);
  });
});

describe('the blocked dense kernel', () => {
  it('gives the same bits as one sum at a time, b[o] + x[r,0] W[o,0] + x[r,1] W[o,1] + ..., for every shape and remainder', () => {
    let seed = 12345;
    const rand = (): number => {
      seed = (seed * 1103515245 + 12345) % 2147483648;
      return seed / 2147483648 - 0.5;
    };
    for (const [rows, n, m] of [[1, 1, 1], [1, 10, 64], [2, 64, 7], [3, 7, 5], [4, 4, 4], [9, 13, 11], [17, 32, 6], [64, 10, 32]] as const) {
      const layer = { inputs: n, outputs: m, activation: 'identity' as const, alpha: 0, weights: Float64Array.from({ length: n * m }, rand), bias: Float64Array.from({ length: m }, rand) };
      const x = Float64Array.from({ length: rows * n }, () => rand() * 1e3);
      const out = new Float64Array(rows * m);
      denseInto(layer, x, rows, out);
      for (let r = 0; r < rows; r++) {
        for (let o = 0; o < m; o++) {
          let s = layer.bias[o] as number;
          for (let i = 0; i < n; i++) s += (x[r * n + i] as number) * (layer.weights[o * n + i] as number);
          expect(Object.is(out[r * m + o], s), `${rows}x${n}x${m} at ${r},${o}`).toBe(true);
        }
      }
    }
  });
});
