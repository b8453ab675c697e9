import type { ActivationName } from '../../core/activations.js';
import { type DenseLayer, type Network, roundToFloat32 } from '../../core/network.js';
import type { Standardizer } from '../../core/standardize.js';
import type { Chain, Step } from './graph.js';
import { OnnxError } from './model.js';
import type { Constant } from './tensor.js';

/** An affine map y = W x + b not yet closed by an activation; W is outputs x inputs, row-major. */
interface Affine {
  inputs: number;
  outputs: number;
  w: Float64Array;
  b: Float64Array;
}

export interface LoweredGraph {
  /** (x - mean) / scale before the first layer: the graph's own leading constants, and --preprocess. */
  preprocess: Standardizer;
  /** The dense layers, weights rounded to float32 as a bundle stores them. */
  network: Network;
  /** What the graph ended in; the bundle keeps logits either way. */
  ending: 'logits' | 'softmax' | 'log_softmax' | 'sigmoid';
  /** Whether the graph standardises its own input (constants before the first layer). */
  standardisesItself: boolean;
}

type Elementwise = Extract<Step, { kind: 'elementwise' }>['op'];

const identityAffine = (n: number): Affine => {
  const w = new Float64Array(n * n);
  for (let i = 0; i < n; i++) w[i * n + i] = 1;
  return { inputs: n, outputs: n, w, b: new Float64Array(n) };
};

/** second(first(x)) as one affine map. */
function compose(first: Affine, second: Affine): Affine {
  const { inputs: n, outputs: m } = first;
  const o = second.outputs;
  const w = new Float64Array(o * n);
  const b = new Float64Array(o);
  for (let r = 0; r < o; r++) {
    let s = second.b[r] as number;
    for (let k = 0; k < m; k++) {
      const v = second.w[r * m + k] as number;
      if (v === 0) continue;
      s += v * (first.b[k] as number);
      for (let c = 0; c < n; c++) w[r * n + c] = (w[r * n + c] as number) + v * (first.w[k * n + c] as number);
    }
    b[r] = s;
  }
  return { inputs: n, outputs: o, w, b };
}

/**
 * Turns the chain into dense layers: Gemm and MatMul + Add give the affine part of a layer,
 * elementwise constants and BatchNormalization fold into it, an activation closes it. Leading
 * elementwise constants (a graph that standardises its own input) become the preprocess step,
 * kept in float64; a trailing Softmax or LogSoftmax is dropped, since bundles keep logits.
 */
export function lowerChain(chain: Chain, file: string, userPreprocess?: Standardizer): LoweredGraph {
  const refuse = (reason: string): never => {
    throw new OnnxError(file, reason);
  };
  let width: number | null = chain.input.width;
  const leading: Array<{ op: Elementwise; c: Constant; at: string }> = [];
  let pending: Affine | null = null;
  const layers: DenseLayer[] = [];
  let ending = 'logits' as LoweredGraph['ending'];
  let started = false;

  const finite = (v: Float64Array, at: string, what: string): Float64Array => {
    const bad = v.findIndex((x) => !Number.isFinite(x));
    if (bad >= 0) refuse(`${at} has ${what} that is ${v[bad]}`);
    return v;
  };

  /** The constant as one value per feature of the current width (a scalar is broadcast). */
  const perFeature = (c: Constant, at: string, n: number | null): Float64Array => {
    if (c.type === 'int') refuse(`${at} uses an integer constant; plumbline folds float32 or float64 constants`);
    finite(c.data, at, 'a constant');
    if (c.data.length === 1) return n === null ? c.data : new Float64Array(n).fill(c.data[0] as number);
    const last = c.dims[c.dims.length - 1];
    if (n !== null && (c.data.length !== n || last !== n)) refuse(`${at} has a constant of shape [${c.dims.join(', ')}] against ${n} values a row; plumbline folds scalars or one value per feature`);
    if (c.dims.slice(0, -1).some((d) => d !== 1)) refuse(`${at} has a constant of shape [${c.dims.join(', ')}]; plumbline folds scalars or one value per feature`);
    return c.data;
  };

  const applyElementwise = (a: Affine, op: Elementwise, c: Float64Array, at: string): Affine => {
    const { inputs: n, outputs: m } = a;
    const w = Float64Array.from(a.w);
    const b = Float64Array.from(a.b);
    for (let r = 0; r < m; r++) {
      const v = (c.length === 1 ? c[0] : c[r]) as number;
      if ((op === 'div' && v === 0) || !Number.isFinite(v)) refuse(`${at} has a constant ${v} that no dense layer can hold`);
      const f = op === 'mul' ? v : op === 'div' ? 1 / v : op === 'rsub' ? -1 : 1;
      const add = op === 'add' ? v : op === 'sub' ? -v : op === 'rsub' ? v : 0;
      for (let k = 0; k < n; k++) w[r * n + k] = (w[r * n + k] as number) * f;
      b[r] = (b[r] as number) * f + add;
    }
    return { inputs: n, outputs: m, w, b };
  };

  const affineOf = (s: Extract<Step, { kind: 'gemm' | 'matmul' }>): Affine => {
    const B = s.b;
    if (B.dims.length !== 2 || B.type === 'int') refuse(`${s.at} needs 2-D float weights, not a tensor of shape [${B.dims.join(', ')}]`);
    finite(B.data, s.at, 'a weight');
    const transB = s.kind === 'gemm' && s.transB;
    const [rows, cols] = B.dims as [number, number];
    const inputs = transB ? cols : rows;
    const outputs = transB ? rows : cols;
    if (width !== null && inputs !== width) refuse(`${s.at} takes ${inputs} values a row, but ${width} arrive`);
    const alpha = s.kind === 'gemm' ? s.alpha : 1;
    const w = new Float64Array(outputs * inputs);
    for (let o = 0; o < outputs; o++) for (let i = 0; i < inputs; i++) w[o * inputs + i] = alpha * (B.data[transB ? o * cols + i : i * cols + o] as number);
    const b = new Float64Array(outputs);
    if (s.kind === 'gemm' && s.c) {
      const c = perFeature(s.c, s.at, outputs);
      for (let o = 0; o < outputs; o++) b[o] = s.beta * ((c.length === 1 ? c[0] : c[o]) as number);
    }
    return { inputs, outputs, w, b };
  };

  const close = (activation: ActivationName, alpha: number, at: string): void => {
    if (!pending) {
      if (width === null) refuse(`${at} comes before any dense layer and the input's width is not known`);
      pending = identityAffine(width as number);
    }
    const a = pending as Affine;
    layers.push({ inputs: a.inputs, outputs: a.outputs, activation, alpha, weights: a.w, bias: a.b });
    pending = null;
  };

  // The ending may be followed by nodes that change nothing (an Identity after the Softmax, say).
  let lastReal = chain.steps.length - 1;
  while (lastReal > 0 && (chain.steps[lastReal]?.kind === 'noop' || chain.steps[lastReal]?.kind === 'reshape')) lastReal--;

  chain.steps.forEach((s, i) => {
    switch (s.kind) {
      case 'noop':
        return;
      case 'reshape': {
        const w = s.shape[1] as number;
        if (w > 0 && width !== null && w !== width) refuse(`${s.at} reshapes to ${w} values a row, but ${width} arrive`);
        if (w > 0) width = w;
        return;
      }
      case 'elementwise':
        if (!started) {
          perFeature(s.c, s.at, width);
          if (s.c.data.length > 1) width = s.c.data.length;
          leading.push({ op: s.op, c: s.c, at: s.at });
          return;
        }
        pending = applyElementwise(pending ?? identityAffine(width as number), s.op, perFeature(s.c, s.at, width), s.at);
        return;
      case 'batchnorm': {
        const n = width ?? s.scale.data.length;
        const [scale, bias, mean, variance] = [s.scale, s.bias, s.mean, s.variance].map((c) => perFeature(c, s.at, n)) as [Float64Array, Float64Array, Float64Array, Float64Array];
        const get = (v: Float64Array, j: number): number => (v.length === 1 ? v[0] : v[j]) as number;
        if (Array.from({ length: n }, (_, j) => get(variance, j) + s.epsilon).some((v) => !(v > 0))) refuse(`${s.at} has a variance that, with its epsilon, is not positive`);
        const a = Float64Array.from({ length: n }, (_, j) => get(scale, j) / Math.sqrt(get(variance, j) + s.epsilon));
        const c = Float64Array.from({ length: n }, (_, j) => get(bias, j) - (a[j] as number) * get(mean, j));
        width = n;
        if (!started) {
          leading.push({ op: 'mul', c: { dims: [n], data: a, type: 'float64' }, at: s.at }, { op: 'add', c: { dims: [n], data: c, type: 'float64' }, at: s.at });
          return;
        }
        pending = applyElementwise(applyElementwise(pending ?? identityAffine(n), 'mul', a, s.at), 'add', c, s.at);
        return;
      }
      case 'gemm':
      case 'matmul': {
        const a = affineOf(s);
        if (!started && width === null) width = a.inputs;
        started = true;
        pending = pending ? compose(pending, a) : a;
        width = a.outputs;
        return;
      }
      case 'activation':
        started = true;
        if (s.name === 'sigmoid' && i === lastReal && (pending?.outputs ?? layers.at(-1)?.outputs) === 1) {
          ending = 'sigmoid';
          return;
        }
        close(s.name, s.alpha, s.at);
        return;
      case 'softmax':
        if (i !== lastReal) refuse(`${s.at} is not the last node; a softmax may only end the graph`);
        ending = s.log ? 'log_softmax' : 'softmax';
        return;
    }
  });

  if (pending) close('identity', 0, 'the last layer');
  const last = layers.at(-1);
  if (!last) refuse('holds no dense layer (Gemm or MatMul)');
  const lastLayer = last as DenseLayer;
  // Whatever the graph computes before its ending is the logits. A bundle's last layer must be
  // affine (the feature-space detector reads its input), so an activation there gets an identity
  // layer after it: exact, and the same function.
  if (ending === 'sigmoid') {
    // One output z and a Sigmoid is a binary classifier: logits [0, z] give the same probabilities.
    if (lastLayer.activation === 'identity') {
      const n = lastLayer.inputs;
      const w = new Float64Array(2 * n);
      w.set(lastLayer.weights, n);
      layers[layers.length - 1] = { ...lastLayer, outputs: 2, weights: w, bias: Float64Array.from([0, lastLayer.bias[0] as number]) };
    } else {
      layers.push({ inputs: 1, outputs: 2, activation: 'identity', alpha: 0, weights: Float64Array.of(0, 1), bias: Float64Array.of(0, 0) });
    }
  } else {
    if (lastLayer.outputs < 2) refuse('gives one output; a classifier needs one score per class, or one output with a Sigmoid');
    if (lastLayer.activation !== 'identity') {
      const a = identityAffine(lastLayer.outputs);
      layers.push({ inputs: a.inputs, outputs: a.outputs, activation: 'identity', alpha: 0, weights: a.w, bias: a.b });
    }
  }

  // The leading constants as (x - mean) / scale, after --preprocess if given.
  const d = (layers[0] as DenseLayer).inputs;
  const mean = new Float64Array(d);
  const scale = new Float64Array(d).fill(1);
  if (userPreprocess) {
    if (userPreprocess.mean.length !== d || userPreprocess.scale.length !== d) refuse(`--preprocess gives ${userPreprocess.mean.length} means and ${userPreprocess.scale.length} scales; the graph takes ${d} values a row`);
    userPreprocess.mean.forEach((v, j) => (mean[j] = v));
    userPreprocess.scale.forEach((v, j) => (scale[j] = v));
  }
  for (const { op, c, at } of leading) {
    const v = perFeature(c, at, d);
    for (let j = 0; j < d; j++) {
      const k = (v.length === 1 ? v[0] : v[j]) as number;
      if (op === 'add') mean[j] = (mean[j] as number) - k * (scale[j] as number);
      else if (op === 'sub') mean[j] = (mean[j] as number) + k * (scale[j] as number);
      else if (op === 'rsub') {
        mean[j] = (mean[j] as number) + k * (scale[j] as number);
        scale[j] = -(scale[j] as number);
      } else if (op === 'mul') {
        if (k === 0) refuse(`${at} multiplies a feature by 0`);
        scale[j] = (scale[j] as number) / k;
      } else {
        if (k === 0) refuse(`${at} divides a feature by 0`);
        scale[j] = (scale[j] as number) * k;
      }
    }
  }
  finite(mean, 'the constants before the first layer', 'a mean');
  finite(scale, 'the constants before the first layer', 'a scale');
  const tiny = scale.findIndex((v) => Math.abs(v) < 1e-30);
  if (tiny >= 0) refuse(`the constants before the first layer scale feature ${tiny} by ${1 / (scale[tiny] as number)}, beyond what a bundle can hold`);
  // A bundle's scale is positive: a sign flip goes into the first layer, whose weights for that
  // feature are negated (exact in float32), and the preprocessing keeps |scale|.
  const first = layers[0] as DenseLayer;
  if (scale.some((v) => v < 0)) {
    const w = Float64Array.from(first.weights);
    for (let j = 0; j < d; j++) {
      if ((scale[j] as number) >= 0) continue;
      scale[j] = -(scale[j] as number);
      for (let o = 0; o < first.outputs; o++) w[o * d + j] = -(w[o * d + j] as number);
    }
    layers[0] = { ...first, weights: w };
  }
  for (const l of layers) {
    finite(l.weights, 'folding the graph', 'a weight');
    finite(l.bias, 'folding the graph', 'a bias');
  }
  const preprocess: Standardizer = { mean: Array.from(mean), scale: Array.from(scale) };
  return { preprocess, network: roundToFloat32({ layers }), ending, standardisesItself: leading.length > 0 };
}
