import { type ActivationName, activateInPlace } from './activations.js';

/** One dense layer: y = f(x W^T + b), W row-major outputs x inputs. */
export interface DenseLayer {
  inputs: number;
  outputs: number;
  activation: ActivationName;
  /** Parameter of leaky_relu and elu; ignored by the others. */
  alpha: number;
  weights: Float64Array;
  bias: Float64Array;
}

export interface Network {
  layers: DenseLayer[];
}

export function inputSize(net: Network): number {
  const first = net.layers[0];
  if (!first) throw new Error('network has no layers');
  return first.inputs;
}

export function outputSize(net: Network): number {
  const last = net.layers[net.layers.length - 1];
  if (!last) throw new Error('network has no layers');
  return last.outputs;
}

/** Throws when consecutive layers do not chain or a buffer has the wrong length. */
export function checkNetworkShapes(net: Network): void {
  if (net.layers.length === 0) throw new Error('network has no layers');
  net.layers.forEach((layer, i) => {
    if (layer.weights.length !== layer.inputs * layer.outputs) {
      throw new Error(`layer ${i}: weights hold ${layer.weights.length} values, expected ${layer.outputs} x ${layer.inputs}`);
    }
    if (layer.bias.length !== layer.outputs) {
      throw new Error(`layer ${i}: bias holds ${layer.bias.length} values, expected ${layer.outputs}`);
    }
    const next = net.layers[i + 1];
    if (next && next.inputs !== layer.outputs) {
      throw new Error(`layer ${i + 1}: takes ${next.inputs} inputs but layer ${i} gives ${layer.outputs}`);
    }
  });
}

/**
 * out[r, o] = b[o] + sum_i x[r, i] W[o, i], for rows r < rows. Both operands are walked
 * contiguously, which is the cache-friendly order for the row-major layout of the bundle.
 */
export function denseInto(layer: DenseLayer, x: Float64Array, rows: number, out: Float64Array): void {
  const { inputs: nIn, outputs: nOut, weights: w, bias: b } = layer;
  for (let r = 0; r < rows; r++) {
    const xOff = r * nIn;
    const oOff = r * nOut;
    for (let o = 0; o < nOut; o++) {
      const wOff = o * nIn;
      let s = b[o] as number;
      for (let i = 0; i < nIn; i++) s += (x[xOff + i] as number) * (w[wOff + i] as number);
      out[oOff + o] = s;
    }
  }
}

export interface ForwardResult {
  /** rows x outputs of the last layer. */
  logits: Float64Array;
  /** rows x width of the last hidden layer (the input of the last layer). */
  hidden: Float64Array;
}

/**
 * Batched forward pass over rows x inputs (row-major). Returns views into buffers owned by the
 * pass; they are overwritten by the next call, so copy what must outlive it.
 */
export interface ForwardPass {
  run(x: Float64Array, rows: number): ForwardResult;
}

export function createForwardPass(net: Network, initialRows = 64): ForwardPass {
  checkNetworkShapes(net);
  let capacity = 0;
  let buffers: Float64Array[] = [];
  const ensure = (rows: number): void => {
    if (rows <= capacity) return;
    capacity = Math.max(rows, capacity * 2, initialRows);
    buffers = net.layers.map((l) => new Float64Array(capacity * l.outputs));
  };
  return {
    run(x, rows) {
      ensure(rows);
      let input = x;
      let hidden = x;
      net.layers.forEach((layer, i) => {
        const out = buffers[i] as Float64Array;
        denseInto(layer, input, rows, out);
        const used = rows * layer.outputs;
        activateInPlace(layer.activation, layer.alpha, out, 0, used);
        if (i === net.layers.length - 2) hidden = out;
        input = out;
      });
      const last = net.layers[net.layers.length - 1] as DenseLayer;
      const hiddenWidth = last.inputs;
      return {
        logits: input.subarray(0, rows * last.outputs),
        hidden: hidden.subarray(0, rows * hiddenWidth),
      };
    },
  };
}

/** One-off forward pass returning fresh copies (convenient for tests and offline work). */
export function forward(net: Network, x: Float64Array, rows: number): ForwardResult {
  const res = createForwardPass(net, rows).run(x, rows);
  return { logits: res.logits.slice(), hidden: res.hidden.slice() };
}

/**
 * Largest feature magnitude accepted anywhere (requests, CSV files). No process value comes near
 * it, and below it a network with float32 weights stays far from float64 overflow.
 */
export const MAX_FEATURE_MAGNITUDE = 1e15;

/** Rounds every parameter to float32, the precision the bundle stores. */
export function roundToFloat32(net: Network): Network {
  return {
    layers: net.layers.map((l) => ({
      ...l,
      alpha: Math.fround(l.alpha),
      weights: Float64Array.from(Float32Array.from(l.weights)),
      bias: Float64Array.from(Float32Array.from(l.bias)),
    })),
  };
}
