import { type NodeProto, type TensorProto, type ValueInfoProto, onnx } from '../../src/io/onnx/model.js';

// Builds small ONNX models in memory (onnx-proto's encoder), for tests of what the importer
// refuses. The graphs that must import are made by PyTorch and onnx.helper (make-onnx.py).

type Attr = { f: number } | { i: number } | { t: TensorProto };

export function floats(name: string, dims: number[], values: number[]): TensorProto {
  return { name, dims, dataType: 1, floatData: values };
}

export function ints(name: string, values: number[]): TensorProto {
  return { name, dims: [values.length], dataType: 7, int64Data: values };
}

export function node(opType: string, input: string[], output: string[], attrs: Record<string, Attr> = {}, extra: Partial<NodeProto> = {}): NodeProto {
  return {
    opType,
    input,
    output,
    name: `${opType.toLowerCase()}_${output[0]}`,
    attribute: Object.entries(attrs).map(([name, a]) => ('f' in a ? { name, f: a.f, type: 1 } : 'i' in a ? { name, i: a.i, type: 2 } : { name, t: a.t, type: 4 })),
    ...extra,
  };
}

export function model(o: { nodes: NodeProto[]; initializers?: TensorProto[]; inputs?: Array<{ name: string; width: number; type?: number }>; outputs?: string[]; opset?: number }): Uint8Array {
  const valueInfo = (name: string, width: number, type = 1): ValueInfoProto => ({
    name,
    type: { tensorType: { elemType: type, shape: { dim: [{ dimParam: 'n' }, { dimValue: width }] } } },
  });
  return onnx.ModelProto.encode({
    irVersion: 7,
    producerName: 'onnx-builder.ts',
    opsetImport: [{ domain: '', version: o.opset ?? 13 }],
    graph: {
      name: 'g',
      node: o.nodes,
      initializer: o.initializers ?? [],
      input: (o.inputs ?? [{ name: 'x', width: 2 }]).map((i) => valueInfo(i.name, i.width, i.type)),
      output: (o.outputs ?? ['y']).map((n) => valueInfo(n, 2)),
    },
  }).finish();
}

/** A Gemm from 2 features to 2 classes, the smallest graph that imports. */
export const W2 = floats('W', [2, 2], [1, 2, 3, 4]);
export const B2 = floats('B', [2], [0.5, -0.5]);
