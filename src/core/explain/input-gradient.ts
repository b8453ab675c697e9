import { activateInPlace, multiplyByDerivative } from '../activations.js';
import { type DenseLayer, type ForwardPass, type Network } from '../network.js';
import { createFastForwardPass } from '../wasm/forward-pass.js';

/** Every layer's values before and after its activation, rows x outputs each. */
export interface LayerTrace {
  rows: number;
  pre: Float64Array[];
  post: Float64Array[];
}

// One pass per layer, without its activation, on the WebAssembly kernel where it runs (the same
// bits as network.ts's loop, about three times as fast): the backward pass needs each layer's
// values before the activation, which the whole-network pass does not keep.
const layerPasses = new WeakMap<DenseLayer, ForwardPass>();

function affinePass(layer: DenseLayer): ForwardPass {
  let pass = layerPasses.get(layer);
  if (!pass) {
    pass = createFastForwardPass({ layers: [{ ...layer, activation: 'identity' }] });
    layerPasses.set(layer, pass);
  }
  return pass;
}

/** One layer's values before its activation, rows x outputs (a copy). */
export function preActivations(layer: DenseLayer, x: Float64Array, rows: number): Float64Array {
  return affinePass(layer).run(x, rows).logits.slice(0, rows * layer.outputs);
}

// Two scratch buffers the activations go through when only `pre` is kept: a layer reads one
// while the next writes the other.
let scratch: [Float64Array, Float64Array] = [new Float64Array(0), new Float64Array(0)];

/**
 * The forward pass over rows x inputs, keeping what the backward pass needs. With keepPost false,
 * `post` stays empty and only `pre` is kept (the path tracing needs no more): one array less per
 * layer.
 */
export function traceForward(net: Network, x: Float64Array, rows: number, keepPost = true): LayerTrace {
  const pre: Float64Array[] = [];
  const post: Float64Array[] = [];
  let input = x;
  net.layers.forEach((layer, l) => {
    // run() returns a view into the pass's own buffer: copied before the next call.
    const a = affinePass(layer).run(input, rows).logits.slice(0, rows * layer.outputs);
    let h: Float64Array;
    if (keepPost) {
      h = a.slice();
      post.push(h);
    } else {
      if ((scratch[l % 2] as Float64Array).length < a.length) scratch[l % 2] = new Float64Array(2 * a.length);
      h = (scratch[l % 2] as Float64Array).subarray(0, a.length);
      h.set(a);
    }
    activateInPlace(layer.activation, layer.alpha, h);
    pre.push(a);
    input = h;
  });
  return { rows, pre, post };
}

/** The logits of a trace (the last layer's output). */
export function traceOutput(trace: LayerTrace): Float64Array {
  return trace.post[trace.post.length - 1] as Float64Array;
}

const transposedPasses = new WeakMap<DenseLayer, ForwardPass>();

/**
 * out[r, i] = sum_o g[r, o] W[o, i] for rows r: the cotangents of a dense layer's inputs. As a
 * forward pass of the transposed layer (zero bias), on the same kernel as the forward passes.
 */
export function backThroughLayer(layer: DenseLayer, g: Float64Array, rows: number): Float64Array {
  let pass = transposedPasses.get(layer);
  if (!pass) {
    const { inputs: n, outputs: m, weights: w } = layer;
    const t = new Float64Array(n * m);
    for (let o = 0; o < m; o++) for (let i = 0; i < n; i++) t[i * m + o] = w[o * n + i] as number;
    pass = createFastForwardPass({ layers: [{ inputs: m, outputs: n, activation: 'identity', alpha: 0, weights: t, bias: new Float64Array(n) }] });
    transposedPasses.set(layer, pass);
  }
  return pass.run(g, rows).logits.slice(0, rows * layer.inputs);
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
    g = backThroughLayer(layer, g, rows);
  }
  return g;
}
