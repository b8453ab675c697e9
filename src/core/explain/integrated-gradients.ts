import type { ActivationName } from '../activations.js';
import type { DenseLayer, Network } from '../network.js';
import { gaussLegendre } from './gauss-legendre.js';
import { type LayerTrace, backThroughLayer, inputGradients, preActivations, traceForward, traceOutput } from './input-gradient.js';
import type { PathTarget } from './targets.js';

// Integrated gradients (Sundararajan, Taly & Yan 2017, "Axiomatic Attribution for Deep
// Networks", ICML): the attribution of input j along the straight path from a baseline b to x is
//   (x_j - b_j) * integral_0^1 dF/dx_j (b + a (x - b)) da,
// and the attributions sum to F(x) - F(b) (their completeness axiom) once the integral is exact.
//
// How the integral is taken. The integrand is the gradient of F along the path. With smooth
// activations (sigmoid, tanh, sin, gelu, softplus) it is analytic, and Gauss-Legendre on
// `steps` nodes converges geometrically; a Riemann sum or the trapezoid rule would converge only
// as 1/steps^2 or slower. With relu, leaky_relu or elu the gradient jumps (or, for elu, its
// derivative jumps) wherever a unit's input crosses 0, and a fixed rule then converges only as
// 1/steps: a jump of J inside a cell of width h leaves an error of up to J h / 2, and a 10-32-32
// relu network has dozens of such crossings on a path. So the path is cut at those crossings
// first and each piece integrated on its own, where the integrand is smooth again:
//   - Every activation piecewise linear (identity, relu, leaky_relu): each member is affine
//     between its own crossings, which are found exactly, layer by layer, by linear
//     interpolation of the units' inputs between points already known (the inputs of layer l are
//     affine between the crossings of layers < l). On each piece the Jacobian is constant, so a
//     piece costs one backward pass per member, and the softmax part of the integrand, smooth on
//     the piece, gets Gauss-Legendre nodes on the members' interpolated logits, no network pass.
//     As those nodes are cheap, each piece is also checked: the same nodes integrate the path
//     derivative dF/da, whose exact integral is F(end) - F(start), and a piece where the two
//     differ (a sharp turn of the softmax far from the data) gets more nodes, then is halved.
//   - Otherwise (elu, or kinks after smooth layers): crossings are bracketed on a uniform grid of
//     `steps` cells and bisected; a unit that crosses twice within one cell is not seen, and its
//     error then falls as 1/steps as above.
// Each piece of length h gets max(minimum, ceil(steps h)) Gauss-Legendre nodes, so `steps` is
// the node count on a path without crossings and more steps give a smaller error everywhere.

export interface PathAttribution {
  /** (x_j - b_j) times the path mean of dF/dx_j, per input, in F's units. */
  contributions: Float64Array;
  /** The path mean of dF/dx_j, per input (F's units per unit of input j). */
  meanGradient: Float64Array;
  /** sum of contributions */
  total: number;
  valueAtBaseline: number;
  valueAtInput: number;
  /** total - (F(x) - F(b)) */
  completenessError: number;
  /** How many points the path was cut at (crossings of kinked units). */
  breakpoints: number;
  /** Gradient evaluations (nodes) used. */
  nodes: number;
}

export interface PathOptions {
  /** Gauss-Legendre nodes over a path without crossings; more nodes, a smaller error. */
  steps: number;
  /**
   * The networks' input is (v - center) / scale of the path's values v: gradients are mapped back
   * to v's units by the chain rule, dF/dv_j = dF/du_j / scale_j. Identity when omitted.
   */
  preprocess?: { mean: ArrayLike<number>; scale: ArrayLike<number> };
}

const PIECEWISE_LINEAR: ReadonlySet<ActivationName> = new Set(['identity', 'relu', 'leaky_relu']);
const KINKED: ReadonlySet<ActivationName> = new Set(['relu', 'leaky_relu', 'elu']);

/**
 * Integrated gradients of target over the members' outputs (each member reads the same input),
 * from baseline to input. Pure: plain arrays in, plain arrays out.
 */
export function integratedGradients(members: readonly Network[], baseline: ArrayLike<number>, input: ArrayLike<number>, target: PathTarget, options: PathOptions): PathAttribution {
  if (members.length === 0) throw new Error('no network to explain');
  if (!(Number.isInteger(options.steps) && options.steps >= 1)) throw new RangeError(`steps must be a positive integer, got ${options.steps}`);
  const d = (members[0]?.layers[0] as DenseLayer).inputs;
  if (baseline.length !== d || input.length !== d) throw new RangeError(`the networks take ${d} inputs; the baseline has ${baseline.length}, the input ${input.length}`);
  const u0 = new Float64Array(d);
  const u1 = new Float64Array(d);
  for (let j = 0; j < d; j++) {
    const c = options.preprocess ? (options.preprocess.mean[j] as number) : 0;
    const s = options.preprocess ? (options.preprocess.scale[j] as number) : 1;
    u0[j] = ((baseline[j] as number) - c) / s;
    u1[j] = ((input[j] as number) - c) / s;
  }
  // The piecewise-linear path reads the outputs off the last layer's inputs to its activation,
  // so it also needs that activation to be the identity (as every bundle's is).
  const allLinear = members.every((net) => net.layers.every((l) => PIECEWISE_LINEAR.has(l.activation)) && net.layers[net.layers.length - 1]?.activation === 'identity');
  const sum = allLinear ? integratePiecewiseLinear(members, u0, u1, target, options.steps) : integrateGeneral(members, u0, u1, target, options.steps);

  const contributions = new Float64Array(d);
  const meanGradient = new Float64Array(d);
  let total = 0;
  for (let j = 0; j < d; j++) {
    // The integral of dF/du_j along the path, times (u1 - u0)_j: the same number as
    // (x_j - b_j) * integral dF/dx_j, since dF/dx_j = dF/du_j / scale_j.
    const c = ((u1[j] as number) - (u0[j] as number)) * (sum.gradient[j] as number);
    contributions[j] = c;
    meanGradient[j] = (sum.gradient[j] as number) / (options.preprocess ? (options.preprocess.scale[j] as number) : 1);
    total += c;
  }
  return {
    contributions,
    meanGradient,
    total,
    valueAtBaseline: sum.f0,
    valueAtInput: sum.f1,
    completenessError: total - (sum.f1 - sum.f0),
    breakpoints: sum.breakpoints,
    nodes: sum.nodes,
  };
}

interface PathSum {
  /** integral over [0, 1] of dF/du along the path, per input */
  gradient: Float64Array;
  f0: number;
  f1: number;
  breakpoints: number;
  nodes: number;
}

function lerpInto(u0: Float64Array, u1: Float64Array, alphas: ArrayLike<number>, out: Float64Array): void {
  const d = u0.length;
  for (let r = 0; r < alphas.length; r++) {
    const a = alphas[r] as number;
    for (let j = 0; j < d; j++) out[r * d + j] = (u0[j] as number) + a * ((u1[j] as number) - (u0[j] as number));
  }
}

function pointsOnPath(u0: Float64Array, u1: Float64Array, alphas: ArrayLike<number>): Float64Array {
  const out = new Float64Array(alphas.length * u0.length);
  lerpInto(u0, u1, alphas, out);
  return out;
}

/** Nodes per piece: the piece's share of `steps`, at least `minimum`. */
function nodesFor(length: number, steps: number, minimum: number): number {
  return Math.max(minimum, Math.ceil(steps * length - 1e-9));
}

// --- every activation piecewise linear ----------------------------------------------------------

interface MemberPath {
  /** Sorted alphas where the member is evaluated: 0, 1 and every crossing. */
  alphas: Float64Array;
  /** Per layer: points x outputs of the layer's inputs to its activation. */
  pre: Float64Array[];
}

/** The distinct values of every list, ascending. */
function sortedUnion(lists: readonly Float64Array[]): Float64Array {
  let n = 0;
  for (const l of lists) n += l.length;
  const all = new Float64Array(n);
  let at = 0;
  for (const l of lists) {
    all.set(l, at);
    at += l.length;
  }
  all.sort();
  let k = 0;
  for (let i = 0; i < n; i++) if (k === 0 || (all[i] as number) !== (all[k - 1] as number)) all[k++] = all[i] as number;
  return all.subarray(0, k);
}

/** Rows of a (sorted) and b (sorted) merged in order, with their rows of every matrix. */
function mergeRows(a: Float64Array, aRows: Float64Array[], b: Float64Array, bRows: Float64Array[], widths: number[]): { alphas: Float64Array; rows: Float64Array[] } {
  const n = a.length + b.length;
  const alphas = new Float64Array(n);
  const rows = widths.map((w) => new Float64Array(n * w));
  let i = 0;
  let j = 0;
  for (let r = 0; r < n; r++) {
    const fromA = j >= b.length || (i < a.length && (a[i] as number) <= (b[j] as number));
    const src = fromA ? aRows : bRows;
    const at = fromA ? i++ : j++;
    alphas[r] = (fromA ? a[at] : b[at]) as number;
    // Element by element: a subarray per row and layer would cost more than the copy.
    for (let l = 0; l < widths.length; l++) {
      const w = widths[l] as number;
      const from = src[l] as Float64Array;
      const to = rows[l] as Float64Array;
      for (let k = 0, i = at * w, o = r * w; k < w; k++) to[o + k] = from[i + k] as number;
    }
  }
  return { alphas, rows };
}

/** 0 and 1 with the crossings of the units whose inputs at 0 and 1 are v (2 x w), sorted. */
function withCrossings(ends: Float64Array, v: Float64Array, w: number): Float64Array {
  const found: number[] = [];
  for (let o = 0; o < w; o++) {
    const va = v[o] as number;
    const vb = v[w + o] as number;
    if ((va < 0 && vb > 0) || (va > 0 && vb < 0)) {
      const at = va / (va - vb);
      if (at > 0 && at < 1) found.push(at);
    }
  }
  if (found.length === 0) return ends;
  const out = new Float64Array(found.length + 2);
  out.set(Float64Array.from(found).sort(), 1);
  out[out.length - 1] = 1;
  return out;
}

/** One member's crossings along the path, found layer by layer (see the comment at the top). */
function traceMemberPath(net: Network, u0: Float64Array, u1: Float64Array): MemberPath {
  const widths = net.layers.map((l) => l.outputs);
  // The first layer's inputs are affine along the whole path: its crossings come from the two
  // ends alone, and the whole network is then traced once on the ends and those crossings.
  const first = net.layers[0] as DenseLayer;
  let alphas: Float64Array = Float64Array.of(0, 1);
  if (KINKED.has(first.activation)) alphas = withCrossings(alphas, preActivations(first, pointsOnPath(u0, u1, alphas), 2), first.outputs);
  let pre: Float64Array[] = traceForward(net, pointsOnPath(u0, u1, alphas), alphas.length, false).pre;
  net.layers.forEach((layer, l) => {
    if (l === 0 || !KINKED.has(layer.activation)) return;
    const found: number[] = [];
    const v = pre[l] as Float64Array;
    const w = layer.outputs;
    for (let i = 0; i + 1 < alphas.length; i++) {
      const lo = alphas[i] as number;
      const hi = alphas[i + 1] as number;
      for (let o = 0; o < w; o++) {
        const va = v[i * w + o] as number;
        const vb = v[(i + 1) * w + o] as number;
        if ((va < 0 && vb > 0) || (va > 0 && vb < 0)) {
          const at = lo + ((hi - lo) * va) / (va - vb);
          if (at > lo && at < hi) found.push(at);
        }
      }
    }
    if (found.length === 0) return;
    const extra = Float64Array.from(found).sort();
    const merged = mergeRows(alphas, pre, extra, traceForward(net, pointsOnPath(u0, u1, extra), extra.length, false).pre, widths);
    alphas = merged.alphas;
    pre = merged.rows;
  });
  return { alphas, pre };
}

/** Sub-pieces a piece may be halved into while its check fails (2^-20 of it at the finest). */
const MAX_DEPTH = 20;
/**
 * Tolerance on the path derivative's integral over a piece, per unit of the piece's length and
 * relative to max(1, |F(x) - F(b)|): summed over the path, 1e-5, a hundredth of the bound on the
 * completeness error that the answers promise.
 */
const PIECE_TOLERANCE = 1e-5;
/** Nodes on one piece before it is halved instead. */
const MAX_NODES = 32;
/**
 * Nodes on a whole path past which no piece is refined further: the work per explanation stays
 * bounded (a vector at 1e15 in every feature gives logits near 1e15, where float64 cannot meet the
 * tolerance, and would otherwise be halved down to MAX_DEPTH everywhere); completeness_error then
 * reports what was reached.
 */
const MAX_REFINED_NODES = 4_000;

function integratePiecewiseLinear(members: readonly Network[], u0: Float64Array, u1: Float64Array, target: PathTarget, steps: number): PathSum {
  const M = members.length;
  const K = target.classes;
  const d = u0.length;
  const paths = members.map((net) => traceMemberPath(net, u0, u1));
  const logits = paths.map((p, m) => p.pre[(members[m] as Network).layers.length - 1] as Float64Array);
  // The union of every member's points cuts the path into pieces on which every member is affine.
  const union = sortedUnion(paths.map((p) => p.alphas));
  // Per member, per own piece: the integral of dF/dz_m over it (K values).
  const sums = paths.map((p) => new Float64Array((p.alphas.length - 1) * K));
  const cursor = new Int32Array(M);
  // Per member on the current piece: logits at its own piece's start, and their slope in alpha.
  const base = new Float64Array(M * K);
  const slope = new Float64Array(M * K);
  const baseAt = new Float64Array(M);
  const at = members.map(() => new Float64Array(K));
  const cot = members.map(() => new Float64Array(K));
  const part = new Float64Array(M * K);
  const logitsAt = (alpha: number): void => {
    for (let m = 0; m < M; m++) {
      const z = at[m] as Float64Array;
      const t = alpha - (baseAt[m] as number);
      for (let k = 0; k < K; k++) z[k] = (base[m * K + k] as number) + t * (slope[m * K + k] as number);
    }
  };
  const valueAt = (alpha: number): number => {
    logitsAt(alpha);
    return target.value(at, 0);
  };
  let nodes = 0;
  let tolerance = 0;
  /**
   * Gauss-Legendre on [lo, hi] into part; the same nodes integrate the path derivative
   * dF/da = sum_m dF/dz_m . dz_m/da, whose exact integral is F(hi) - F(lo): where the two differ
   * by more than the tolerance (a sharp turn of the softmax inside the piece) the piece is halved.
   */
  const integrate = (lo: number, hi: number, fLo: number, fHi: number, depth: number): void => {
    const h = hi - lo;
    // More nodes first (the integrand is analytic on the piece, so that converges fast), halves
    // only past MAX_NODES.
    for (let n = nodesFor(h, steps, 1); ; n *= 2) {
      const rule = gaussLegendre(Math.min(n, MAX_NODES));
      part.fill(0);
      let derivative = 0;
      for (let q = 0; q < rule.nodes.length; q++) {
        logitsAt(lo + h * (rule.nodes[q] as number));
        target.cotangent(at, 0, cot, 0);
        const w = h * (rule.weights[q] as number);
        for (let m = 0; m < M; m++) {
          const c = cot[m] as Float64Array;
          for (let k = 0; k < K; k++) {
            part[m * K + k] = (part[m * K + k] as number) + w * (c[k] as number);
            derivative += w * (c[k] as number) * (slope[m * K + k] as number);
          }
        }
      }
      nodes += rule.nodes.length;
      if (Math.abs(derivative - (fHi - fLo)) <= tolerance * h || depth >= MAX_DEPTH || nodes >= MAX_REFINED_NODES) break;
      if (n >= MAX_NODES) {
        const mid = lo + h / 2;
        const fMid = valueAt(mid);
        integrate(lo, mid, fLo, fMid, depth + 1);
        integrate(mid, hi, fMid, fHi, depth + 1);
        return;
      }
    }
    for (let m = 0; m < M; m++) {
      const sm = sums[m] as Float64Array;
      const c = (cursor[m] as number) * K;
      for (let k = 0; k < K; k++) sm[c + k] = (sm[c + k] as number) + (part[m * K + k] as number);
    }
  };
  // The piece of each member whose logits are in base and slope (-1: none yet).
  const loaded = new Int32Array(M).fill(-1);
  const moveTo = (lo: number): void => {
    for (let m = 0; m < M; m++) {
      const p = paths[m] as MemberPath;
      let c = cursor[m] as number;
      while ((p.alphas[c + 1] as number) <= lo) c++;
      cursor[m] = c;
      // Most steps along the union move one member to its next piece; the others stay.
      if (loaded[m] === c) continue;
      loaded[m] = c;
      const a0 = p.alphas[c] as number;
      const a1 = p.alphas[c + 1] as number;
      const z = logits[m] as Float64Array;
      baseAt[m] = a0;
      for (let k = 0; k < K; k++) {
        base[m * K + k] = z[c * K + k] as number;
        slope[m * K + k] = ((z[(c + 1) * K + k] as number) - (z[c * K + k] as number)) / (a1 - a0);
      }
    }
  };
  moveTo(0);
  const f0 = valueAt(0);
  // The end, from the last piece of each member (moveTo(1) would run past the last point).
  for (let m = 0; m < M; m++) cursor[m] = (paths[m] as MemberPath).alphas.length - 2;
  moveTo(union[union.length - 2] as number);
  const f1 = valueAt(1);
  cursor.fill(0);
  moveTo(0);
  tolerance = PIECE_TOLERANCE * Math.max(1, Math.abs(f1 - f0));
  let fLo = f0;
  for (let s = 0; s + 1 < union.length; s++) {
    const lo = union[s] as number;
    const hi = union[s + 1] as number;
    if (!(hi > lo)) continue;
    moveTo(lo);
    // At the last point, the value from the pieces' own ends (the same logits, to the last bit).
    const fHi = s + 2 === union.length ? f1 : valueAt(hi);
    integrate(lo, hi, fLo, fHi, 0);
    fLo = fHi;
  }
  // One backward pass per member and piece, with the piece's slopes from the midpoint of its
  // units' inputs (affine on the piece, so the mean of its two ends).
  const gradient = new Float64Array(d);
  members.forEach((net, m) => accumulatePieceGradients(net, paths[m] as MemberPath, sums[m] as Float64Array, gradient));
  return { gradient, f0, f1, breakpoints: union.length - 2, nodes };
}

/**
 * gradient += sum over the member's pieces i of J_i^T v_i, J_i the Jacobian on piece i and v_i its
 * row of cotangents: the backward pass over every piece at once, each unit's slope read off the
 * piece's midpoint. The first layer, the same for every piece, multiplies their sum once.
 */
function accumulatePieceGradients(net: Network, path: MemberPath, cotangents: Float64Array, gradient: Float64Array): void {
  const pieces = path.alphas.length - 1;
  let g = cotangents;
  for (let l = net.layers.length - 1; l >= 0; l--) {
    const layer = net.layers[l] as DenseLayer;
    const w = layer.outputs;
    const pre = path.pre[l] as Float64Array;
    // pre holds the pieces' ends: piece i runs from row i to row i + 1.
    if (layer.activation === 'relu') {
      for (let i = 0; i < pieces * w; i++) if (!((pre[i] as number) + (pre[i + w] as number) > 0)) g[i] = 0;
    } else if (layer.activation === 'leaky_relu') {
      for (let i = 0; i < pieces * w; i++) if ((pre[i] as number) + (pre[i + w] as number) < 0) g[i] = (g[i] as number) * layer.alpha;
    }
    if (l > 0) {
      g = backThroughLayer(layer, g, pieces);
      continue;
    }
    const sum = new Float64Array(w);
    for (let i = 0; i < pieces; i++) for (let o = 0; o < w; o++) sum[o] = (sum[o] as number) + (g[i * w + o] as number);
    const { inputs: n, weights } = layer;
    for (let o = 0; o < w; o++) {
      const v = sum[o] as number;
      if (v === 0) continue;
      for (let j = 0; j < n; j++) gradient[j] = (gradient[j] as number) + v * (weights[o * n + j] as number);
    }
  }
}

// --- any activation -------------------------------------------------------------------------------

/** Bisection steps for a crossing bracketed on the grid: to 2^-30 of a cell, 1e-11 of the path at 64 steps. */
const BISECTIONS = 30;

/** Crossings of kinked units, bracketed on the grid and bisected (every member's, pooled). */
function findCrossings(members: readonly Network[], u0: Float64Array, u1: Float64Array, steps: number): number[] {
  const grid = Array.from({ length: steps + 1 }, (_, i) => i / steps);
  const found: number[] = [];
  members.forEach((net) => {
    const kinked = net.layers.map((l, i) => (KINKED.has(l.activation) ? i : -1)).filter((i) => i >= 0);
    if (kinked.length === 0) return;
    const trace = traceForward(net, pointsOnPath(u0, u1, grid), grid.length);
    // Brackets: [lo, hi, layer, unit]
    let brackets: Array<[number, number, number, number]> = [];
    for (const l of kinked) {
      const width = (net.layers[l] as DenseLayer).outputs;
      const pre = trace.pre[l] as Float64Array;
      for (let i = 0; i < steps; i++) {
        for (let o = 0; o < width; o++) {
          const va = pre[i * width + o] as number;
          const vb = pre[(i + 1) * width + o] as number;
          if ((va < 0 && vb > 0) || (va > 0 && vb < 0)) brackets.push([grid[i] as number, grid[i + 1] as number, l, o]);
        }
      }
    }
    if (brackets.length === 0) return;
    const signAtLo = brackets.map(([lo, , l, o]) => Math.sign((trace.pre[l] as Float64Array)[Math.round(lo * steps) * (net.layers[l] as DenseLayer).outputs + o] as number));
    for (let it = 0; it < BISECTIONS; it++) {
      const mids = brackets.map(([lo, hi]) => (lo + hi) / 2);
      const t = traceForward(net, pointsOnPath(u0, u1, mids), mids.length);
      brackets = brackets.map(([lo, hi, l, o], r) => {
        const v = (t.pre[l] as Float64Array)[r * (net.layers[l] as DenseLayer).outputs + o] as number;
        const mid = mids[r] as number;
        return Math.sign(v) === signAtLo[r] ? [mid, hi, l, o] : [lo, mid, l, o];
      });
    }
    for (const [lo, hi] of brackets) found.push((lo + hi) / 2);
  });
  return found;
}

function integrateGeneral(members: readonly Network[], u0: Float64Array, u1: Float64Array, target: PathTarget, steps: number): PathSum {
  const K = target.classes;
  const d = u0.length;
  const cuts = [...new Set([0, 1, ...findCrossings(members, u0, u1, steps)])].sort((a, b) => a - b);
  const alphas: number[] = [];
  const weights: number[] = [];
  for (let s = 0; s + 1 < cuts.length; s++) {
    const lo = cuts[s] as number;
    const h = (cuts[s + 1] as number) - lo;
    if (!(h > 0)) continue;
    // Two nodes at least on a piece: exact for cubics, where one node would be exact for lines only.
    const rule = gaussLegendre(nodesFor(h, steps, 2));
    for (let q = 0; q < rule.nodes.length; q++) {
      alphas.push(lo + h * (rule.nodes[q] as number));
      weights.push(h * (rule.weights[q] as number));
    }
  }
  const n = alphas.length;
  const all = [0, 1, ...alphas];
  const traces = members.map((net) => traceForward(net, pointsOnPath(u0, u1, all), all.length));
  const outputs = traces.map(traceOutput);
  const cot = members.map(() => new Float64Array(all.length * K));
  for (let r = 0; r < n; r++) {
    target.cotangent(outputs, r + 2, cot, r + 2);
    for (const c of cot) for (let k = 0; k < K; k++) c[(r + 2) * K + k] = (c[(r + 2) * K + k] as number) * (weights[r] as number);
  }
  const gradient = new Float64Array(d);
  members.forEach((net, m) => {
    const g = inputGradients(net, traces[m] as LayerTrace, cot[m] as Float64Array);
    for (let r = 0; r < n; r++) for (let j = 0; j < d; j++) gradient[j] = (gradient[j] as number) + (g[(r + 2) * d + j] as number);
  });
  return { gradient, f0: target.value(outputs, 0), f1: target.value(outputs, 1), breakpoints: cuts.length - 2, nodes: n };
}
