import { activateInPlace, multiplyByDerivative } from '../activations.js';
import { type DenseLayer, type Network, denseInto } from '../network.js';

/** Every layer's values before and after its activation, rows x outputs each. */
export interface LayerTrace {
  rows: number;
  pre: Float64Array[];
  post: Float64Array[];
}

/** The forward pass over rows x inputs, keeping what the backward pass needs. */
export function traceForward(net: Network, x: Float64Array, rows: number): LayerTrace {
  const pre: Float64Array[] = [];
  const post: Float64Array[] = [];
  let input = x;
  for (const layer of net.layers) {
    const a = new Float64Array(rows * layer.outputs);
    denseInto(layer, input, rows, a);
    const h = a.slice();
    activateInPlace(layer.activation, layer.alpha, h);
    pre.push(a);
    post.push(h);
    input = h;
  }
  return { rows, pre, post };
}

/** The logits of a trace (the last layer's output). */
export function traceOutput(trace: LayerTrace): Float64Array {
  return trace.post[trace.post.length - 1] as Float64Array;
}

/** out[r, i] = sum_o g[r, o] W[o, i]: the cotangent of a dense layer's input. */
function transposeTimes(layer: DenseLayer, g: Float64Array, rows: number): Float64Array {
  const { inputs: n, outputs: m, weights: w } = layer;
  const out = new Float64Array(rows * n);
  for (let r = 0; r < rows; r++) {
    const gOff = r * m;
    const oOff = r * n;
    for (let o = 0; o < m; o++) {
      const v = g[gOff + o] as number;
      if (v === 0) continue;
      const wOff = o * n;
      for (let i = 0; i < n; i++) out[oOff + i] = (out[oOff + i] as number) + v * (w[wOff + i] as number);
    }
  }
  return out;
}

/**
 * Vector-Jacobian products through the network (reverse-mode differentiation, the same chain
 * rule as training's back-propagation): for each row r, cotangent[r] (one value per output)
 * times the Jacobian of the outputs with respect to the inputs at trace row r. rows x inputs.
 */
export function inputGradients(net: Network, trace: LayerTrace, cotangent: Float64Array): Float64Array {
  const rows = trace.rows;
  let g: Float64Array = cotangent.slice(0, rows * (net.layers[net.layers.length - 1] as DenseLayer).outputs);
  for (let l = net.layers.length - 1; l >= 0; l--) {
    const layer = net.layers[l] as DenseLayer;
    multiplyByDerivative(layer.activation, layer.alpha, trace.pre[l] as Float64Array, trace.post[l] as Float64Array, g);
    g = transposeTimes(layer, g, rows);
  }
  return g;
}
