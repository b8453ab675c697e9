import { describe, expect, it } from 'vitest';
import { ACTIVATIONS, type ActivationName, activateInPlace } from '../../src/core/activations.js';
import type { Network } from '../../src/core/network.js';
import { createFastForwardPass, createWasmForwardPass } from '../../src/core/wasm/forward-pass.js';
import { kernelStatus } from '../../src/core/wasm/module.js';

// The WebAssembly kernel against the plain definition, y = f(b[o] + x[r,0] W[o,0] + x[r,1] W[o,1] + ...)
// summed in order of i, computed here one value at a time: the same bits are required, not a tolerance.

let seed = 987654;
const rand = (): number => {
  seed = (seed * 1103515245 + 12345) % 2147483648;
  return seed / 2147483648 - 0.5;
};

function network(shape: number[], hidden: ActivationName): Network {
  return {
    layers: shape.slice(0, -1).map((inputs, i) => {
      const outputs = shape[i + 1] as number;
      return {
        inputs,
        outputs,
        activation: i < shape.length - 2 ? hidden : 'identity',
        alpha: hidden === 'leaky_relu' ? 0.01 : hidden === 'elu' ? 1 : 0,
        weights: Float64Array.from({ length: inputs * outputs }, rand),
        bias: Float64Array.from({ length: outputs }, rand),
      };
    }),
  };
}

/** The plain loop, one sum at a time; returns every layer's output. */
function reference(net: Network, x: Float64Array, rows: number): Float64Array[] {
  const outs: Float64Array[] = [];
  let input = x;
  for (const l of net.layers) {
    const out = new Float64Array(rows * l.outputs);
    for (let r = 0; r < rows; r++) {
      for (let o = 0; o < l.outputs; o++) {
        let s = l.bias[o] as number;
        for (let i = 0; i < l.inputs; i++) s += (input[r * l.inputs + i] as number) * (l.weights[o * l.inputs + i] as number);
        out[r * l.outputs + o] = s;
      }
    }
    activateInPlace(l.activation, l.alpha, out, 0, out.length);
    outs.push(out);
    input = out;
  }
  return outs;
}

const sameBits = (a: Float64Array, b: Float64Array, what: string): void => {
  expect(a.length, what).toBe(b.length);
  for (let i = 0; i < a.length; i++) if (!Object.is(a[i], b[i])) expect.fail(`${what}: index ${i} is ${a[i]}, the plain loop gives ${b[i]}`);
};

describe('the WebAssembly dense kernel', () => {
  it('builds on this runtime: Node 20 and later have WebAssembly SIMD, so a kernel that does not build is a fault, not a fallback', () => {
    expect(kernelStatus()).toEqual({ kind: 'webassembly-simd' });
  });

  it('gives the same bits as the plain loop for every shape, remainder of rows and outputs, and activation', () => {
    const shapes = [[1, 1], [3, 5], [2, 3, 2], [10, 64, 64, 5], [7, 13, 6, 3], [32, 256, 10], [5, 9, 17, 4]];
    for (const shape of shapes) {
      for (const activation of ACTIVATIONS) {
        const net = network(shape, activation);
        const pass = createWasmForwardPass(net, 2);
        if (!pass) throw new Error('the kernel did not compile');
        for (const rows of [1, 2, 3, 4, 5, 7, 8, 33]) {
          const x = Float64Array.from({ length: rows * (shape[0] as number) }, () => rand() * 20);
          const want = reference(net, x, rows);
          const got = pass.run(x, rows);
          const label = `${shape.join('-')} ${activation} rows ${rows}`;
          sameBits(got.logits, want[want.length - 1] as Float64Array, `${label} logits`);
          sameBits(got.hidden, want.length >= 2 ? (want[want.length - 2] as Float64Array) : x, `${label} hidden`);
        }
      }
    }
  });

  it('keeps its weights when its buffers grow, and answers a smaller batch after a larger one', () => {
    const net = network([6, 12, 3], 'relu');
    const pass = createWasmForwardPass(net, 1);
    if (!pass) throw new Error('the kernel did not compile');
    for (const rows of [1, 50, 4000, 3]) {
      const x = Float64Array.from({ length: rows * 6 }, rand);
      const want = reference(net, x, rows);
      sameBits(pass.run(x, rows).logits, want[1] as Float64Array, `rows ${rows}`);
    }
  });

  it('passes an overflow through as the plain loop does, so that the scorer can refuse it', () => {
    const net = network([2, 4, 2], 'relu');
    const x = Float64Array.of(1e308, 1e308, 0.5, Number.POSITIVE_INFINITY);
    const want = reference(net, x, 2);
    sameBits((createWasmForwardPass(net) as NonNullable<ReturnType<typeof createWasmForwardPass>>).run(x, 2).logits, want[1] as Float64Array, 'overflow');
  });

  it('keeps relu\'s -0 as -0 and a NaN as NaN in the fused kernel, as `if (v < 0) v = 0` does', () => {
    // Bias -0 and input 0 times a negative weight: every sum is -0 + (-0) = -0. A max instruction
    // would give +0 here; the hidden layer is read back, so the sign of zero shows.
    const net: Network = {
      layers: [
        { inputs: 2, outputs: 4, activation: 'relu', alpha: 0, weights: Float64Array.of(-1, -2, -3, -4, 5, -6, -7, 8), bias: Float64Array.of(-0, -0, -0, -0) },
        { inputs: 4, outputs: 1, activation: 'identity', alpha: 0, weights: Float64Array.of(1, 1, 1, 1), bias: Float64Array.of(0) },
      ],
    };
    const x = Float64Array.of(0, 0, Number.NaN, 1, -1, -1);
    const got = (createWasmForwardPass(net) as NonNullable<ReturnType<typeof createWasmForwardPass>>).run(x, 3);
    const want = reference(net, x, 3);
    sameBits(got.hidden, want[0] as Float64Array, 'hidden');
    expect(Object.is(got.hidden[0], -0)).toBe(true);
    expect(Number.isNaN(got.hidden[4])).toBe(true);
  });
});

describe('the forward pass the scorer uses', () => {
  it('gives the plain loop bits whichever kernel runs it', () => {
    const net = network([10, 32, 32, 5], 'tanh');
    const x = Float64Array.from({ length: 9 * 10 }, () => rand() * 3);
    const want = reference(net, x, 9);
    sameBits(createFastForwardPass(net).run(x, 9).logits, want[2] as Float64Array, 'logits');
  });
});
