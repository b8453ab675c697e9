import type { ActivationName } from '../../core/activations.js';
import { type GraphProto, type NodeProto, OnnxError, int } from './model.js';
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
] as const;
const OP_NAMES = new Set(SUPPORTED_OPS.map((s) => s.split(' ')[0] as string));

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

function attribute(n: NodeProto, name: string): { f?: number | null; i?: unknown; t?: unknown; floats?: number[] | null; ints?: unknown[] | null } | undefined {
  return (n.attribute ?? []).find((a) => a.name === name) as never;
}
const attrFloat = (n: NodeProto, name: string, fallback: number): number => {
  const a = attribute(n, name);
  // Float attributes are float32 in ONNX: 0.2 is read as 0.20000000298023224, as a runtime reads it.
  return a && a.f !== undefined && a.f !== null ? Math.fround(a.f) : fallback;
};
const attrInt = (n: NodeProto, name: string, fallback: number): number => {
  const a = attribute(n, name);
  return a && a.i !== undefined && a.i !== null ? int(a.i as number) : fallback;
};

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

  const consts = new Map<string, Constant>();
  for (const t of graph.initializer ?? []) consts.set(t.name ?? '', readTensor(t, file));
  for (const n of nodes) {
    if (n.opType !== 'Constant') continue;
    const value = attribute(n, 'value');
    const floats = attribute(n, 'value_floats') ?? attribute(n, 'value_float');
    if (value?.t) consts.set(n.output?.[0] ?? '', readTensor(value.t as never, file));
    else if (floats) {
      const data = floats.floats && floats.floats.length > 0 ? floats.floats : [floats.f ?? 0];
      consts.set(n.output?.[0] ?? '', { dims: attribute(n, 'value_float') ? [] : [data.length], data: Float64Array.from(data, (v) => Math.fround(v)), type: 'float32' });
    } else refuse(`${describeNode(n)} holds no tensor plumbline can read (value or value_float(s))`);
  }

  const inputs = (graph.input ?? []).filter((i) => !consts.has(i.name ?? ''));
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
    if (n.opType === 'Constant') continue;
    for (const i of n.input ?? []) if (i !== '' && !consts.has(i)) consumers.set(i, [...(consumers.get(i) ?? []), n]);
  }
  const users = (t: string): NodeProto[] => consumers.get(t) ?? [];
  const constOf = (n: NodeProto, index: number): Constant | null => {
    const name = n.input?.[index];
    return name === undefined || name === '' ? null : (consts.get(name) ?? null);
  };
  const scalar = (c: Constant | null | undefined, value: number, tol: number): boolean => c !== null && c !== undefined && c.data.length === 1 && Math.abs((c.data[0] as number) - value) <= tol;

  const visited = new Set<NodeProto>();
  const steps: Step[] = [];
  const outputName = outputs[0]?.name ?? '';
  let cur = input.name ?? '';

  /** x * 0.5 * (1 + erf(x / sqrt 2)), in the orders exporters write it, as one GELU step. */
  const matchGelu = (h: string, two: NodeProto[]): { nodes: NodeProto[]; output: string } | null => {
    if (two.length !== 2) return null;
    const isMerge = (n: NodeProto): boolean => n.opType === 'Mul' && (n.input ?? []).filter((i) => !consts.has(i)).length === 2;
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
    let halves = rest.filter(half).length + other.seq.filter(half).length;
    if (rest.length !== rest.filter(half).length || other.seq.length !== other.seq.filter(half).length) return null;
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
        const c = (first ?? second) as Constant;
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
        const [scale, bias, mean, variance] = [1, 2, 3, 4].map((i) => constOf(n, i));
        if (!scale || !bias || !mean || !variance) refuse(`${at} needs constant scale, bias, mean and variance`);
        return { kind: 'batchnorm', scale: scale as Constant, bias: bias as Constant, mean: mean as Constant, variance: variance as Constant, epsilon: attrFloat(n, 'epsilon', 1e-5), at };
      }
      case 'Relu':
        return { kind: 'activation', name: 'relu', alpha: 0, at };
      case 'LeakyRelu':
        return { kind: 'activation', name: 'leaky_relu', alpha: attrFloat(n, 'alpha', Math.fround(0.01)), at };
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
      case 'Flatten':
        if (attrInt(n, 'axis', 1) !== 1) refuse(`${at} flattens from axis ${attrInt(n, 'axis', 1)}; plumbline imports Flatten with axis 1 only`);
        return { kind: 'noop', at };
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
        return refuse(`${at} (${op}) appears outside the pattern plumbline reads it in`);
    }
  };

  while (cur !== outputName || users(cur).length > 0) {
    const next = users(cur);
    if (next.length === 0) refuse(`the tensor ${JSON.stringify(cur)} leads nowhere: it is neither used nor the graph's output ${JSON.stringify(outputName)}`);
    if (next.length > 1) {
      const gelu = matchGelu(cur, next);
      if (!gelu) refuse(`the tensor ${JSON.stringify(cur)} feeds ${next.length} nodes (${next.map(describeNode).join(', ')}): the graph branches, as a skip connection does; plumbline imports a single chain of layers`);
      for (const n of (gelu as { nodes: NodeProto[] }).nodes) visited.add(n);
      steps.push({ kind: 'activation', name: 'gelu', alpha: 0, at: `the GELU at ${describeNode(next[0] as NodeProto)}` });
      cur = (gelu as { output: string }).output;
      continue;
    }
    const n = next[0] as NodeProto;
    const computed = (n.input ?? []).filter((i) => i !== '' && !consts.has(i));
    if (computed.length !== 1) refuse(`${describeNode(n)} takes ${computed.length} computed inputs (${computed.join(', ')}): the graph branches or joins; plumbline imports a single chain of layers`);
    if (visited.has(n)) refuse(`${describeNode(n)} is reached twice: the graph has a cycle`);
    visited.add(n);
    steps.push(toStep(n));
    for (const extra of (n.output ?? []).slice(1)) {
      if (extra !== '' && (users(extra).length > 0 || extra === outputName)) refuse(`${describeNode(n)} has a second output ${JSON.stringify(extra)} that is used; plumbline imports one output per node`);
    }
    cur = n.output?.[0] ?? '';
  }
  const stray = nodes.find((n) => n.opType !== 'Constant' && !visited.has(n));
  if (stray) refuse(`${describeNode(stray)} is not on the path from the input ${JSON.stringify(input.name)} to the output ${JSON.stringify(outputName)}`);
  return { input: { name: input.name ?? '', width, type: type as 'float32' | 'float64' }, output: outputName, steps };
}
