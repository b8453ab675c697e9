import type { ActivationName } from '../../core/activations.js';
import { type GraphProto, type NodeProto, OnnxError, type TensorProto, int } from './model.js';
import { type Constant, readTensor } from './tensor.js';

/** The operators a graph may hold; anything else is refused by name. */
export const SUPPORTED_OPS = [
  'Gemm',
  'MatMul',
  'Add',
  'Sub',
  'Mul',
  'Div',
  'BatchNormalization',
  'Relu',
  'LeakyRelu',
  'Elu',
  'Sigmoid',
  'Tanh',
  'Sin',
  'Softplus',
  'Erf (as part of GELU: x * 0.5 * (1 + erf(x / sqrt 2)))',
  'Identity',
  'Flatten',
  'Reshape (to [N, -1])',
  'Dropout',
  'Softmax',
  'LogSoftmax',
  'Constant',
  'Reciprocal, Neg, Sqrt (on constants)',
] as const;
const OP_NAMES = new Set(['Reciprocal', 'Neg', 'Sqrt', ...SUPPORTED_OPS.map((s) => s.split(/[ ,]/)[0] as string)]);

/** Ops evaluated at import when every input is a constant (exporters write 1 / std as Reciprocal of a buffer). */
const FOLDABLE = new Set(['Reciprocal', 'Neg', 'Sqrt', 'Add', 'Sub', 'Mul', 'Div', 'Identity']);

/** One step of the chain from the graph's input to its output, constants resolved. */
export type Step =
  | { kind: 'elementwise'; op: 'add' | 'sub' | 'rsub' | 'mul' | 'div'; c: Constant; at: string }
  | { kind: 'gemm'; b: Constant; c: Constant | null; alpha: number; beta: number; transB: boolean; at: string }
  | { kind: 'matmul'; b: Constant; at: string }
  | { kind: 'batchnorm'; scale: Constant; bias: Constant; mean: Constant; variance: Constant; epsilon: number; at: string }
  | { kind: 'activation'; name: ActivationName; alpha: number; at: string }
  | { kind: 'reshape'; shape: number[]; at: string }
  | { kind: 'noop'; at: string }
  | { kind: 'softmax'; log: boolean; at: string };

export interface Chain {
  input: { name: string; width: number | null; type: 'float32' | 'float64' };
  output: string;
  steps: Step[];
}

/** How a node is named in messages: its name and op type, or its output when it has no name. */
export function describeNode(n: NodeProto): string {
  return `node ${JSON.stringify(n.name || n.output?.[0] || '?')} (${n.opType})`;
}

// AttributeProto.AttributeType (onnx.proto).
const ATTR_FLOAT = 1;
const ATTR_INT = 2;
const ATTR_TENSOR = 4;
const ATTR_FLOATS = 6;

const FLOAT_TYPES: Record<number, 'float32' | 'float64'> = { 1: 'float32', 11: 'float64' };

/**
 * Reads the graph as a single chain of steps from its one input to its one output, or refuses it
 * naming the node that breaks the chain. GELU's Erf decomposition, the one pattern in which a
 * tensor feeds two nodes, is recognised and read as one step.
 */
export function readChain(graph: GraphProto, opset: number, file: string): Chain {
  const refuse = (reason: string): never => {
    throw new OnnxError(file, reason);
  };
  const nodes = graph.node ?? [];
  for (const n of nodes) {
    if (n.domain && n.domain !== 'ai.onnx') refuse(`${describeNode(n)} is from the operator domain ${JSON.stringify(n.domain)}; plumbline imports the default ONNX domain only`);
    if (!OP_NAMES.has(n.opType ?? '')) refuse(`${describeNode(n)} is not supported. plumbline imports dense feed-forward classifiers built of: ${SUPPORTED_OPS.join(', ')}`);
  }

  const attribute = (n: NodeProto, name: string, type: number): { f?: number | null; i?: unknown; t?: TensorProto | null; floats?: number[] | null } | undefined => {
    const a = (n.attribute ?? []).find((x) => x.name === name);
    if (!a) return undefined;
    if (a.type !== type) refuse(`${describeNode(n)} has attribute ${name} of type ${a.type}, where ONNX defines type ${type}`);
    return a as never;
  };
  // Float attributes are float32 in ONNX: 0.2 is read as 0.20000000298023224, as a runtime reads it.
  const attrFloat = (n: NodeProto, name: string, fallback: number): number => {
    const a = attribute(n, name, ATTR_FLOAT);
    const v = a && a.f !== undefined && a.f !== null ? Math.fround(a.f) : Math.fround(fallback);
    if (!Number.isFinite(v)) refuse(`${describeNode(n)} has ${name} = ${v}`);
    return v;
  };
  const attrInt = (n: NodeProto, name: string, fallback: number): number => {
    const a = attribute(n, name, ATTR_INT);
    return a && a.i !== undefined && a.i !== null ? int(a.i as number) : fallback;
  };

  // Constants are read when first used, so that an initializer nothing uses (of a type plumbline
  // does not read, say) does not stop the import.
  const protos = new Map<string, TensorProto>();
  for (const t of graph.initializer ?? []) protos.set(t.name ?? '', t);
  const consts = new Map<string, Constant>();
  const isConst = (name: string): boolean => protos.has(name) || consts.has(name);
  const constant = (name: string): Constant | null => {
    const hit = consts.get(name);
    if (hit) return hit;
    const proto = protos.get(name);
    if (!proto) return null;
    const c = readTensor(proto, file);
    consts.set(name, c);
    return c;
  };

  const visited = new Set<NodeProto>();
  for (const n of nodes) {
    if (n.opType === 'Constant') {
      const value = attribute(n, 'value', ATTR_TENSOR);
      const floats = attribute(n, 'value_floats', ATTR_FLOATS);
      const one = attribute(n, 'value_float', ATTR_FLOAT);
      const out = n.output?.[0] ?? '';
      if (value?.t) consts.set(out, readTensor(value.t, file));
      else if (floats?.floats) consts.set(out, { dims: [floats.floats.length], data: Float64Array.from(floats.floats, (v) => Math.fround(v)), type: 'float32' });
      else if (one) consts.set(out, { dims: [], data: Float64Array.of(Math.fround(one.f ?? 0)), type: 'float32' });
      else refuse(`${describeNode(n)} holds no tensor plumbline can read (value, value_float or value_floats)`);
      visited.add(n);
      continue;
    }
    const ins = (n.input ?? []).filter((i) => i !== '');
    if (FOLDABLE.has(n.opType ?? '') && ins.length > 0 && ins.every(isConst)) {
      consts.set(n.output?.[0] ?? '', fold(n, ins.map((i) => constant(i) as Constant), refuse));
      visited.add(n);
    } else if (!['Reciprocal', 'Neg', 'Sqrt'].includes(n.opType ?? '')) continue;
    else refuse(`${describeNode(n)} works on the data; plumbline takes ${n.opType} of constants only`);
  }

  const inputs = (graph.input ?? []).filter((i) => !isConst(i.name ?? ''));
  if (inputs.length !== 1) refuse(`the graph has ${inputs.length} inputs (${inputs.map((i) => i.name).join(', ')}); plumbline imports graphs with one input, the feature vector`);
  const outputs = graph.output ?? [];
  if (outputs.length !== 1) refuse(`the graph has ${outputs.length} outputs (${outputs.map((o) => o.name).join(', ')}); plumbline imports graphs with one output, the class scores`);
  const input = inputs[0] as NonNullable<GraphProto['input']>[number];
  const tensorType = input.type?.tensorType;
  const type = FLOAT_TYPES[tensorType?.elemType ?? 0];
  if (!type) refuse(`the input ${input.name} has element type ${tensorType?.elemType}; plumbline imports float32 or float64 inputs`);
  const dims = tensorType?.shape?.dim ?? [];
  if (dims.length !== 0 && dims.length !== 2) refuse(`the input ${input.name} has ${dims.length} dimensions; plumbline imports graphs that take a batch of feature vectors, [N, features]`);
  const widthDim = dims[1]?.dimValue;
  const width = widthDim !== undefined && widthDim !== null && int(widthDim) > 0 ? int(widthDim) : null;

  const consumers = new Map<string, NodeProto[]>();
  for (const n of nodes) {
    if (visited.has(n)) continue;
    for (const i of new Set(n.input ?? [])) if (i !== '' && !isConst(i)) consumers.set(i, [...(consumers.get(i) ?? []), n]);
  }
  const users = (t: string): NodeProto[] => consumers.get(t) ?? [];
  const constOf = (n: NodeProto, index: number): Constant | null => {
    const name = n.input?.[index];
    return name === undefined || name === '' ? null : constant(name);
  };
  const scalar = (c: Constant | null | undefined, value: number, tol: number): boolean => c !== null && c !== undefined && c.data.length === 1 && Math.abs((c.data[0] as number) - value) <= tol;

  const steps: Step[] = [];
  const outputName = outputs[0]?.name ?? '';
  let cur = input.name ?? '';

  /** x * 0.5 * (1 + erf(x / sqrt 2)), in the orders exporters write it, as one GELU step. */
  const matchGelu = (two: NodeProto[]): { nodes: NodeProto[]; output: string } | null => {
    if (two.length !== 2) return null;
    const isMerge = (n: NodeProto): boolean => n.opType === 'Mul' && (n.input ?? []).filter((i) => !isConst(i)).length === 2;
    const branch = (start: NodeProto): { seq: NodeProto[]; merge: NodeProto } | null => {
      const seq: NodeProto[] = [];
      let n = start;
      for (let guard = 0; guard < 6; guard++) {
        if (isMerge(n)) return { seq, merge: n };
        seq.push(n);
        const next = users(n.output?.[0] ?? '');
        if (next.length !== 1) return null;
        n = next[0] as NodeProto;
      }
      return null;
    };
    const [a, b] = two.map(branch);
    if (!a || !b || a.merge !== b.merge) return null;
    const erfSide = a.seq.some((n) => n.opType === 'Erf') ? a : b;
    const other = erfSide === a ? b : a;
    const half = (n: NodeProto | undefined): boolean => n?.opType === 'Mul' && (scalar(constOf(n, 1), 0.5, 1e-7) || scalar(constOf(n, 0), 0.5, 1e-7));
    const [s, e, p, ...rest] = erfSide.seq;
    const scaleOk =
      (s?.opType === 'Div' && scalar(constOf(s, 1), Math.SQRT2, 1e-6)) || (s?.opType === 'Mul' && (scalar(constOf(s, 1), Math.SQRT1_2, 1e-6) || scalar(constOf(s, 0), Math.SQRT1_2, 1e-6)));
    const plusOne = p?.opType === 'Add' && (scalar(constOf(p, 1), 1, 0) || scalar(constOf(p, 0), 1, 0));
    if (!scaleOk || e?.opType !== 'Erf' || !plusOne) return null;
    if (!rest.every(half) || !other.seq.every(half)) return null;
    let halves = rest.length + other.seq.length;
    const used = [...erfSide.seq, ...other.seq, erfSide.merge];
    let output = erfSide.merge.output?.[0] ?? '';
    if (halves === 0) {
      const after = users(output);
      if (after.length !== 1 || !half(after[0])) return null;
      used.push(after[0] as NodeProto);
      output = after[0]?.output?.[0] ?? '';
      halves = 1;
    }
    return halves === 1 ? { nodes: used, output } : null;
  };

  const toStep = (n: NodeProto): Step => {
    const at = describeNode(n);
    const op = n.opType as string;
    switch (op) {
      case 'Add':
      case 'Sub':
      case 'Mul':
      case 'Div': {
        const first = constOf(n, 0);
        const second = constOf(n, 1);
        const c = first ?? second;
        if (!c) return refuse(`${at} takes no constant; plumbline folds ${op} of the data and a constant only`);
        if (op === 'Div' && first) refuse(`${at} divides a constant by the data, which no dense layer can do`);
        const kind = op === 'Add' ? 'add' : op === 'Mul' ? 'mul' : op === 'Div' ? 'div' : first ? 'rsub' : 'sub';
        return { kind: 'elementwise', op: kind, c, at };
      }
      case 'Gemm': {
        if (attrInt(n, 'transA', 0) !== 0) refuse(`${at} transposes its data input (transA = 1); plumbline imports Gemm over rows of feature vectors`);
        const b = constOf(n, 1);
        if (!b || n.input?.[0] !== cur) refuse(`${at} must take the data as its first input and constant weights as its second`);
        return { kind: 'gemm', b: b as Constant, c: constOf(n, 2), alpha: attrFloat(n, 'alpha', 1), beta: attrFloat(n, 'beta', 1), transB: attrInt(n, 'transB', 0) === 1, at };
      }
      case 'MatMul': {
        const b = constOf(n, 1);
        if (!b || n.input?.[0] !== cur) refuse(`${at} must multiply the data (first input) by constant weights (second input)`);
        return { kind: 'matmul', b: b as Constant, at };
      }
      case 'BatchNormalization': {
        if (attrInt(n, 'training_mode', 0) !== 0) refuse(`${at} is in training mode; export the model in evaluation mode (model.eval())`);
        if (attrInt(n, 'spatial', 1) !== 1) refuse(`${at} has spatial = 0, which plumbline does not import`);
        if ((n.output ?? []).filter((o) => o !== '').length > 1) refuse(`${at} gives its running statistics as outputs, as in training; export the model in evaluation mode (model.eval())`);
        const [scale, bias, mean, variance] = [1, 2, 3, 4].map((i) => constOf(n, i));
        if (!scale || !bias || !mean || !variance) refuse(`${at} needs constant scale, bias, mean and variance`);
        return { kind: 'batchnorm', scale: scale as Constant, bias: bias as Constant, mean: mean as Constant, variance: variance as Constant, epsilon: attrFloat(n, 'epsilon', 1e-5), at };
      }
      case 'Relu':
        return { kind: 'activation', name: 'relu', alpha: 0, at };
      case 'LeakyRelu':
        return { kind: 'activation', name: 'leaky_relu', alpha: attrFloat(n, 'alpha', 0.01), at };
      case 'Elu':
        return { kind: 'activation', name: 'elu', alpha: attrFloat(n, 'alpha', 1), at };
      case 'Sigmoid':
        return { kind: 'activation', name: 'sigmoid', alpha: 0, at };
      case 'Tanh':
        return { kind: 'activation', name: 'tanh', alpha: 0, at };
      case 'Sin':
        return { kind: 'activation', name: 'sin', alpha: 0, at };
      case 'Softplus':
        return { kind: 'activation', name: 'softplus', alpha: 0, at };
      case 'Identity':
        return { kind: 'noop', at };
      case 'Dropout': {
        const training = constOf(n, 2);
        if (training && (training.data[0] ?? 0) !== 0) refuse(`${at} is in training mode; export the model in evaluation mode (model.eval())`);
        return { kind: 'noop', at };
      }
      case 'Flatten': {
        // The input is [N, features]: axis 1 and axis -1 both leave it as it is.
        const axis = attrInt(n, 'axis', 1);
        if (axis !== 1 && axis !== -1) refuse(`${at} flattens from axis ${axis}; plumbline imports Flatten with axis 1 (or -1) only`);
        return { kind: 'noop', at };
      }
      case 'Reshape': {
        const shape = constOf(n, 1);
        if (!shape) refuse(`${at} takes its shape from the data; plumbline imports a constant shape [N, -1]`);
        const s = Array.from((shape as Constant).data);
        if (s.length !== 2 || !(s[0] === -1 || s[0] === 0)) refuse(`${at} reshapes to [${s.join(', ')}]; plumbline imports Reshape to [-1, width] or [0, -1] only`);
        return { kind: 'reshape', shape: s, at };
      }
      case 'Softmax':
      case 'LogSoftmax': {
        const axis = attrInt(n, 'axis', opset >= 13 ? -1 : 1);
        if (axis !== 1 && axis !== -1) refuse(`${at} works along axis ${axis}; plumbline imports a softmax over the classes (axis 1 or -1)`);
        return { kind: 'softmax', log: op === 'LogSoftmax', at };
      }
      default:
        return refuse(`${at} appears outside the pattern plumbline reads it in`);
    }
  };

  while (cur !== outputName || users(cur).length > 0) {
    if (steps.length > nodes.length) refuse('the graph has a cycle');
    const next = users(cur);
    if (next.length === 0) refuse(`the tensor ${JSON.stringify(cur)} leads nowhere: it is neither used nor the graph's output ${JSON.stringify(outputName)}`);
    if (next.length > 1) {
      const gelu = matchGelu(next);
      if (!gelu) {
        refuse(
          `the tensor ${JSON.stringify(cur)} feeds ${next.length} nodes (${next.map(describeNode).join(', ')}): the graph branches, as a skip connection does (or holds a GELU written in a form plumbline does not read); plumbline imports a single chain of layers`,
        );
      }
      const g = gelu as { nodes: NodeProto[]; output: string };
      if (g.nodes.some((n) => visited.has(n))) refuse(`${describeNode(g.nodes[0] as NodeProto)} is reached twice: the graph has a cycle`);
      for (const n of g.nodes) visited.add(n);
      steps.push({ kind: 'activation', name: 'gelu', alpha: 0, at: `the GELU at ${describeNode(next[0] as NodeProto)}` });
      cur = g.output;
      continue;
    }
    const n = next[0] as NodeProto;
    const computed = [...new Set((n.input ?? []).filter((i) => i !== '' && !isConst(i)))];
    if (computed.length !== 1 || (n.input ?? []).filter((i) => i === cur).length !== 1) {
      refuse(`${describeNode(n)} takes ${computed.length === 1 ? 'the same tensor twice' : `${computed.length} computed inputs (${computed.join(', ')})`}: the graph branches or joins; plumbline imports a single chain of layers`);
    }
    if (visited.has(n)) refuse(`${describeNode(n)} is reached twice: the graph has a cycle`);
    visited.add(n);
    steps.push(toStep(n));
    for (const extra of (n.output ?? []).slice(1)) {
      if (extra !== '' && (users(extra).length > 0 || extra === outputName)) refuse(`${describeNode(n)} has a second output ${JSON.stringify(extra)} that is used; plumbline imports one output per node`);
    }
    cur = n.output?.[0] ?? '';
  }
  const stray = nodes.find((n) => !visited.has(n));
  if (stray) refuse(`${describeNode(stray)} is not on the path from the input ${JSON.stringify(input.name)} to the output ${JSON.stringify(outputName)}`);
  return { input: { name: input.name ?? '', width, type: type as 'float32' | 'float64' }, output: outputName, steps };
}

/** Evaluates an op whose inputs are all constants, elementwise (a scalar broadcasts). */
function fold(n: NodeProto, ins: Constant[], refuse: (reason: string) => never): Constant {
  const op = n.opType as string;
  const [a, b] = ins as [Constant, Constant | undefined];
  if (a.type === 'int' || (b && b.type === 'int')) refuse(`${describeNode(n)} works on integer constants; plumbline folds float constants only`);
  const unary: Record<string, (v: number) => number> = { Reciprocal: (v) => 1 / v, Neg: (v) => -v, Sqrt: Math.sqrt, Identity: (v) => v };
  const type = a.type === 'float64' || b?.type === 'float64' ? 'float64' : 'float32';
  // A float32 graph computes in float32: each result is rounded as a runtime would round it.
  const round = type === 'float32' ? Math.fround : (v: number) => v;
  if (unary[op]) return { dims: a.dims, data: a.data.map((v) => round((unary[op] as (v: number) => number)(v))), type };
  if (!b) return refuse(`${describeNode(n)} needs two inputs`);
  const big = a.data.length >= b.data.length ? a : b;
  if (a.data.length !== b.data.length && a.data.length !== 1 && b.data.length !== 1) refuse(`${describeNode(n)} combines constants of shapes [${a.dims.join(', ')}] and [${b.dims.join(', ')}]; plumbline folds equal shapes or a scalar`);
  const at = (c: Constant, i: number): number => (c.data.length === 1 ? c.data[0] : c.data[i]) as number;
  const f: Record<string, (x: number, y: number) => number> = { Add: (x, y) => x + y, Sub: (x, y) => x - y, Mul: (x, y) => x * y, Div: (x, y) => x / y };
  return { dims: big.dims, data: big.data.map((_, i) => round((f[op] as (x: number, y: number) => number)(at(a, i), at(b, i)))), type };
}
