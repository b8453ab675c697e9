import { type ActivationName, activateInPlace } from '../activations.js';
import { type DenseLayer, type ForwardPass, type Network, checkNetworkShapes, createForwardPass } from '../network.js';
import { PAGE, align16, instantiateKernel } from './module.js';

interface Placed {
  layer: DenseLayer;
  blocks: number;
  /** Outputs padded to whole blocks of 4: the row stride of this layer's output. */
  stride: number;
  w: number;
  b: number;
}

/**
 * The forward pass of network.ts on the WebAssembly kernel, the same to the last bit; null where
 * WebAssembly SIMD is not available (the caller falls back to the JavaScript kernel). Weights are
 * packed once, per block of 4 outputs and per input, as W[o..o+3, i]; activations run on the
 * kernel's output in place.
 */
export function createWasmForwardPass(net: Network, initialRows = 64): ForwardPass | null {
  checkNetworkShapes(net);
  const kernel = instantiateKernel(1);
  if (!kernel) return null;
  const { memory, dense, denseRelu } = kernel;

  let top = 0;
  const placed: Placed[] = net.layers.map((layer) => {
    const blocks = Math.ceil(layer.outputs / 4);
    const w = top;
    top = align16(top + blocks * layer.inputs * 32);
    const b = top;
    top = align16(top + blocks * 32);
    return { layer, blocks, stride: blocks * 4, w, b };
  });
  const weightBytes = top;
  const grow = (bytes: number): void => {
    const more = Math.ceil((bytes - memory.buffer.byteLength) / PAGE);
    if (more > 0) memory.grow(more);
  };
  grow(weightBytes);
  {
    const f = new Float64Array(memory.buffer);
    for (const p of placed) {
      const { inputs: n, outputs: m, weights, bias } = p.layer;
      for (let blk = 0; blk < p.blocks; blk++) {
        for (let q = 0; q < 4; q++) {
          const o = blk * 4 + q;
          if (o >= m) continue;
          f[p.b / 8 + o] = bias[o] as number;
          for (let i = 0; i < n; i++) f[p.w / 8 + (blk * n + i) * 4 + q] = weights[o * n + i] as number;
        }
      }
    }
  }

  const first = net.layers[0] as DenseLayer;
  const last = placed[placed.length - 1] as Placed;
  let capacity = 0;
  let inputAt = 0;
  let outAt: number[] = [];
  let views: { input: Float64Array; outs: Float64Array[] } = { input: new Float64Array(0), outs: [] };
  let logits = new Float64Array(0);
  let hiddenCopy = new Float64Array(0);
  const ensure = (rows: number): void => {
    if (rows <= capacity) return;
    capacity = Math.max(rows, capacity * 2, initialRows);
    let at = weightBytes;
    inputAt = at;
    at = align16(at + capacity * first.inputs * 8);
    outAt = placed.map((p) => {
      const start = at;
      at = align16(at + capacity * p.stride * 8);
      return start;
    });
    grow(at);
    views = {
      input: new Float64Array(memory.buffer, inputAt, capacity * first.inputs),
      outs: placed.map((p, l) => new Float64Array(memory.buffer, outAt[l] as number, capacity * p.stride)),
    };
    logits = new Float64Array(capacity * last.layer.outputs);
    const penultimate = placed[placed.length - 2];
    hiddenCopy = penultimate && penultimate.stride !== penultimate.layer.outputs ? new Float64Array(capacity * penultimate.layer.outputs) : hiddenCopy;
  };
  /** rows x outputs of a padded output, as a dense rows x outputs array. */
  const compact = (padded: Float64Array, rows: number, p: Placed, into: Float64Array): Float64Array => {
    const m = p.layer.outputs;
    if (p.stride === m) return padded.subarray(0, rows * m);
    // Element by element: a subarray per row costs more than copying a handful of values.
    const stride = p.stride;
    for (let r = 0; r < rows; r++) for (let k = 0, i = r * stride, o = r * m; k < m; k++) into[o + k] = padded[i + k] as number;
    return into.subarray(0, rows * m);
  };

  return {
    run(x, rows) {
      ensure(rows);
      const n0 = first.inputs;
      views.input.set(x.subarray(0, rows * n0));
      let inPtr = inputAt;
      let inStride = n0;
      placed.forEach((p, l) => {
        const out = outAt[l] as number;
        // relu, the usual hidden activation, is applied inside the kernel as the sums are stored.
        if (p.layer.activation === 'relu') denseRelu(inPtr, inStride * 8, p.layer.inputs, p.w, p.b, out, p.stride * 8, rows, p.blocks);
        else {
          dense(inPtr, inStride * 8, p.layer.inputs, p.w, p.b, out, p.stride * 8, rows, p.blocks);
          activateInPlace(p.layer.activation as ActivationName, p.layer.alpha, views.outs[l] as Float64Array, 0, rows * p.stride);
        }
        inPtr = out;
        inStride = p.stride;
      });
      const L = placed.length;
      const hidden = L >= 2 ? compact(views.outs[L - 2] as Float64Array, rows, placed[L - 2] as Placed, hiddenCopy) : x.subarray(0, rows * n0);
      return { logits: compact(views.outs[L - 1] as Float64Array, rows, last, logits), hidden };
    },
  };
}

/** The WebAssembly pass where it can run, else the JavaScript one: the same results either way. */
export function createFastForwardPass(net: Network, initialRows = 64): ForwardPass {
  return createWasmForwardPass(net, initialRows) ?? createForwardPass(net, initialRows);
}
