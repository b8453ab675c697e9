import { describe, expect, it } from 'vitest';
import { ACTIVATIONS } from '../../src/core/activations.js';
import { createRng } from '../../src/core/rng.js';
import { createWorkspace, initNetwork, lossAndGradients, zeroGradients } from '../../src/core/train.js';

// Gradient check of the back-propagated loss against central finite differences (common
// practice, e.g. the gradient-checking recipe of CS231n): relative error below 1e-6 in float64.
describe('cross-entropy gradient', () => {
  for (const activation of ACTIVATIONS) {
    it(`matches finite differences through ${activation} layers, with row weights`, () => {
      const rng = createRng(7);
      const rows = 5;
      const net = initNetwork([3, 4, 3, 3], activation, activation === 'leaky_relu' ? 0.1 : 1, rng);
      const ws = createWorkspace(net, rows);
      for (let i = 0; i < ws.input.length; i++) ws.input[i] = rng.normal();
      const labels = Int32Array.of(0, 2, 1, 2, 0);
      const weights = Float64Array.of(1, 2.5, 0.5, 2.5, 1);
      const grads = zeroGradients(net);
      lossAndGradients(net, ws, labels, weights, rows, grads);
      const loss = (): number => lossAndGradients(net, ws, labels, weights, rows, null);
      const h = 1e-6;
      let worst = 0;
      net.layers.forEach((layer, l) => {
        for (const [params, g] of [
          [layer.weights, grads.weights[l]!],
          [layer.bias, grads.bias[l]!],
        ] as const) {
          for (let i = 0; i < params.length; i++) {
            const keep = params[i]!;
            params[i] = keep + h;
            const up = loss();
            params[i] = keep - h;
            const down = loss();
            params[i] = keep;
            const numeric = (up - down) / (2 * h);
            const analytic = g[i]!;
            const rel = Math.abs(numeric - analytic) / Math.max(1e-8, Math.abs(numeric) + Math.abs(analytic));
            // Absolute differences below 1e-9 are rounding noise on near-zero gradients, not errors.
            if (Math.abs(numeric - analytic) > 1e-9) worst = Math.max(worst, rel);
          }
        }
      });
      expect(worst).toBeLessThan(1e-6);
    });
  }
});
