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
 * out[r, o] = b[o] + sum_i x[r, i] W[o, i], for rows r < rows. Blocks of 4 rows x 4 outputs keep
 * 16 sums in registers and read each loaded x and W value four times (register blocking), about
 * 3x faster than one sum at a time. Every sum still starts at b[o] and adds the terms in order of
 * i, so the results are the same to the last bit as the plain loop's.
 */
export function denseInto(layer: DenseLayer, x: Float64Array, rows: number, out: Float64Array): void {
  const { inputs: n, outputs: m, weights: w, bias: b } = layer;
  let r = 0;
  for (; r + 4 <= rows; r += 4) {
    const x0 = r * n;
    const x1 = x0 + n;
    const x2 = x1 + n;
    const x3 = x2 + n;
    let o = 0;
    for (; o + 4 <= m; o += 4) {
      const w0 = o * n;
      const w1 = w0 + n;
      const w2 = w1 + n;
      const w3 = w2 + n;
      const b0 = b[o] as number;
      const b1 = b[o + 1] as number;
      const b2 = b[o + 2] as number;
      const b3 = b[o + 3] as number;
      let s00 = b0, s01 = b1, s02 = b2, s03 = b3;
      let s10 = b0, s11 = b1, s12 = b2, s13 = b3;
      let s20 = b0, s21 = b1, s22 = b2, s23 = b3;
      let s30 = b0, s31 = b1, s32 = b2, s33 = b3;
      for (let i = 0; i < n; i++) {
        const v0 = x[x0 + i] as number;
        const v1 = x[x1 + i] as number;
        const v2 = x[x2 + i] as number;
        const v3 = x[x3 + i] as number;
        const u0 = w[w0 + i] as number;
        const u1 = w[w1 + i] as number;
        const u2 = w[w2 + i] as number;
        const u3 = w[w3 + i] as number;
        s00 += v0 * u0; s01 += v0 * u1; s02 += v0 * u2; s03 += v0 * u3;
        s10 += v1 * u0; s11 += v1 * u1; s12 += v1 * u2; s13 += v1 * u3;
        s20 += v2 * u0; s21 += v2 * u1; s22 += v2 * u2; s23 += v2 * u3;
        s30 += v3 * u0; s31 += v3 * u1; s32 += v3 * u2; s33 += v3 * u3;
      }
      const p0 = r * m + o;
      const p1 = p0 + m;
      const p2 = p1 + m;
      const p3 = p2 + m;
      out[p0] = s00; out[p0 + 1] = s01; out[p0 + 2] = s02; out[p0 + 3] = s03;
      out[p1] = s10; out[p1 + 1] = s11; out[p1 + 2] = s12; out[p1 + 3] = s13;
      out[p2] = s20; out[p2 + 1] = s21; out[p2 + 2] = s22; out[p2 + 3] = s23;
      out[p3] = s30; out[p3 + 1] = s31; out[p3 + 2] = s32; out[p3 + 3] = s33;
    }
    if (o < m) denseRange(w, b, n, m, x, r, r + 4, o, out);
  }
  // The rows left over (all of them when one vector is scored): one row x 4 outputs at a time,
  // four independent sums, so that the adds do not wait on each other.
  for (; r < rows; r++) {
    const x0 = r * n;
    let o = 0;
    for (; o + 4 <= m; o += 4) {
      const w0 = o * n;
      const w1 = w0 + n;
      const w2 = w1 + n;
      const w3 = w2 + n;
      let s0 = b[o] as number;
      let s1 = b[o + 1] as number;
      let s2 = b[o + 2] as number;
      let s3 = b[o + 3] as number;
      for (let i = 0; i < n; i++) {
        const v = x[x0 + i] as number;
        s0 += v * (w[w0 + i] as number);
        s1 += v * (w[w1 + i] as number);
        s2 += v * (w[w2 + i] as number);
        s3 += v * (w[w3 + i] as number);
      }
      const p0 = r * m + o;
      out[p0] = s0;
      out[p0 + 1] = s1;
      out[p0 + 2] = s2;
      out[p0 + 3] = s3;
    }
    if (o < m) denseRange(w, b, n, m, x, r, r + 1, o, out);
  }
}

/** The plain loop, for the rows [r0, r1) and outputs [o0, m) that do not fill a block. */
function denseRange(w: Float64Array, b: Float64Array, n: number, m: number, x: Float64Array, r0: number, r1: number, o0: number, out: Float64Array): void {
  for (let r = r0; r < r1; r++) {
    const xOff = r * n;
    for (let o = o0; o < m; o++) {
      const wOff = o * n;
      let s = b[o] as number;
      for (let i = 0; i < n; i++) s += (x[xOff + i] as number) * (w[wOff + i] as number);
      out[r * m + o] = s;
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
