import { describe, expect, it } from 'vitest';
import { ACTIVATIONS, type ActivationName } from '../../../src/core/activations.js';
import { traceForward, inputGradients, traceOutput } from '../../../src/core/explain/input-gradient.js';
import { integratedGradients } from '../../../src/core/explain/integrated-gradients.js';
import { logitDifference, servedLogProbability } from '../../../src/core/explain/targets.js';
import type { Network } from '../../../src/core/network.js';
import { createRng, type Rng } from '../../../src/core/rng.js';
import { initNetwork } from '../../../src/core/train.js';

/** Members of one shape, weights scaled up from the initialisation so that the softmax is far from flat. */
function members(activation: ActivationName, count: number, scale: number, rng: Rng, sizes = [10, 32, 32, 5]): Network[] {
  const alpha = activation === 'leaky_relu' ? 0.1 : activation === 'elu' ? 0.5 : 1;
  return Array.from({ length: count }, () => {
    const net = initNetwork(sizes, activation, alpha, rng);
    for (const l of net.layers) {
      for (let i = 0; i < l.weights.length; i++) l.weights[i] = (l.weights[i] as number) * scale;
      for (let i = 0; i < l.bias.length; i++) l.bias[i] = 0.3 * rng.normal();
    }
    return net;
  });
}

describe('inputGradients', () => {
  // Central finite differences (common practice): the backward pass is the derivative of the forward one.
  for (const activation of ACTIVATIONS) {
    it(`matches finite differences of the served log-probability through ${activation} layers`, () => {
      const rng = createRng(11);
      const nets = members(activation, 3, 1.5, rng, [4, 6, 5, 3]);
      const target = servedLogProbability(1, 3, 0.7);
      const x = Float64Array.from({ length: 4 }, () => rng.normal());
      const f = (v: Float64Array): number => target.value(nets.map((n) => traceOutput(traceForward(n, v, 1))), 0);
      const outs = nets.map((n) => traceOutput(traceForward(n, x, 1)));
      const cot = nets.map(() => new Float64Array(3));
      target.cotangent(outs, 0, cot, 0);
      const grad = new Float64Array(4);
      nets.forEach((n, m) => inputGradients(n, traceForward(n, x, 1), cot[m] as Float64Array).forEach((g, j) => (grad[j] = (grad[j] as number) + g)));
      const h = 1e-6;
      for (let j = 0; j < 4; j++) {
        const up = x.slice();
        const down = x.slice();
        up[j] = (up[j] as number) + h;
        down[j] = (down[j] as number) - h;
        expect(grad[j]).toBeCloseTo((f(up) - f(down)) / (2 * h), 6);
      }
    });
  }
});

describe('integratedGradients', () => {
  // With no hidden layer the logits are linear, z_c - z_k = sum_j (W_cj - W_kj) (x_j - m_j) / s_j
  // + const, so the attribution of x_j to the logit difference is exactly
  // (W_cj - W_kj) / s_j * (x_j - b_j): the closed form Sundararajan et al. (2017) note for linear models.
  it('gives w_j (x_j - b_j) on a network with no hidden layer, to 1e-9', () => {
    const rng = createRng(5);
    const d = 6;
    const K = 4;
    const net: Network = { layers: [{ inputs: d, outputs: K, activation: 'identity', alpha: 0, weights: Float64Array.from({ length: d * K }, () => rng.normal()), bias: Float64Array.from({ length: K }, () => rng.normal()) }] };
    const mean = Array.from({ length: d }, () => 100 * rng.normal());
    const scale = Array.from({ length: d }, () => 0.1 + 20 * rng.next());
    for (let trial = 0; trial < 20; trial++) {
      const x = Float64Array.from(mean, (m, j) => m + (scale[j] as number) * 3 * rng.normal());
      const b = Float64Array.from(mean, (m, j) => m + (scale[j] as number) * rng.normal());
      const c = trial % K;
      const k = (trial + 1 + (trial % (K - 1))) % K;
      const r = integratedGradients([net], b, x, logitDifference(c, k, K), { steps: 64, preprocess: { mean, scale } });
      for (let j = 0; j < d; j++) {
        const w = ((net.layers[0]!.weights[c * d + j] as number) - (net.layers[0]!.weights[k * d + j] as number)) / (scale[j] as number);
        const expected = w * ((x[j] as number) - (b[j] as number));
        expect(Math.abs((r.contributions[j] as number) - expected)).toBeLessThanOrEqual(1e-9 * Math.max(1, Math.abs(expected)));
      }
    }
  });

  // The completeness axiom (Sundararajan et al. 2017, section 3): the attributions add up to
  // F(x) - F(b). Checked on 100 vectors per activation, from the baseline's neighbourhood to six
  // standard deviations out, with five members and a temperature as a bundle has them.
  for (const activation of ACTIVATIONS) {
    it(`adds up to log p(x) - log p(b) within 1e-3 max(1, |total|) at 64 steps through ${activation} layers`, () => {
      const rng = createRng(ACTIVATIONS.indexOf(activation) + 100);
      const nets = members(activation, 5, 1.5, rng);
      let worst = 0;
      for (let v = 0; v < 100; v++) {
        const spread = 0.5 + 5.5 * rng.next();
        const x = Float64Array.from({ length: 10 }, () => spread * rng.normal());
        const b = Float64Array.from({ length: 10 }, () => 0.1 * rng.normal());
        const r = integratedGradients(nets, b, x, servedLogProbability(v % 5, 5, 0.8), { steps: 64 });
        expect(Math.abs(r.total - r.contributions.reduce((s, c) => s + c, 0))).toBeLessThan(1e-12);
        worst = Math.max(worst, Math.abs(r.completenessError) / Math.max(1, Math.abs(r.total)));
      }
      expect(worst).toBeLessThanOrEqual(1e-3);
    });
  }

  it('comes closer to completeness with more steps', () => {
    const rng = createRng(21);
    const nets = members('tanh', 3, 2.5, rng);
    const vectors = Array.from({ length: 20 }, () => Float64Array.from({ length: 10 }, () => 3 * rng.normal()));
    const b = new Float64Array(10);
    const meanError = (steps: number): number =>
      vectors.reduce((s, x, i) => s + Math.abs(integratedGradients(nets, b, x, servedLogProbability(i % 5, 5, 1), { steps }).completenessError), 0) / vectors.length;
    const errors = [4, 8, 16, 32].map(meanError);
    for (let i = 1; i < errors.length; i++) expect(errors[i]).toBeLessThan(errors[i - 1] as number);
    expect(errors[0]).toBeGreaterThan(1e-4);
  });

  it('agrees with a fine Riemann sum of finite-difference gradients on a relu ensemble', () => {
    // An independent reference: the midpoint rule on 20,000 points with central differences, no
    // backward pass and no crossing search. Across the relu kinks it converges only as 1/n
    // (4,000 and 20,000 points differ by 1e-4), hence 3 decimals.
    const rng = createRng(8);
    const nets = members('relu', 2, 1.5, rng, [3, 8, 8, 3]);
    const target = servedLogProbability(0, 3, 1);
    const f = (v: Float64Array): number => target.value(nets.map((n) => traceOutput(traceForward(n, v, 1))), 0);
    const x = Float64Array.of(2.1, -1.7, 0.9);
    const b = Float64Array.of(-0.3, 0.2, 0.1);
    const r = integratedGradients(nets, b, x, target, { steps: 64 });
    const n = 20000;
    expect(Math.abs(r.completenessError)).toBeLessThan(1e-6);
    const h = 1e-7;
    for (let j = 0; j < 3; j++) {
      let s = 0;
      for (let i = 0; i < n; i++) {
        const a = (i + 0.5) / n;
        const p = Float64Array.from(b, (bj, k) => bj + a * ((x[k] as number) - bj));
        const up = p.slice();
        const down = p.slice();
        up[j] = (up[j] as number) + h;
        down[j] = (down[j] as number) - h;
        s += (f(up) - f(down)) / (2 * h);
      }
      expect(r.contributions[j]).toBeCloseTo(((x[j] as number) - (b[j] as number)) * (s / n), 3);
    }
  });
});
