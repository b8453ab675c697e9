import onnxProto from 'onnx-proto';

// The named import type-checks but fails at run time (STACK.md): take the namespace off the default.
export const { onnx } = onnxProto;
export type ModelProto = onnxProto.onnx.IModelProto;
export type GraphProto = onnxProto.onnx.IGraphProto;
export type NodeProto = onnxProto.onnx.INodeProto;
export type TensorProto = onnxProto.onnx.ITensorProto;
export type AttributeProto = onnxProto.onnx.IAttributeProto;
export type ValueInfoProto = onnxProto.onnx.IValueInfoProto;

/** The ONNX file cannot be imported: the message names the file and, where there is one, the node. */
export class OnnxError extends Error {
  constructor(
    readonly file: string,
    readonly reason: string,
  ) {
    super(`${file}: ${reason}`);
    this.name = 'OnnxError';
  }
}

/** The operator-set versions of the default domain this importer reads (what PyTorch 1.13 exports, and older). */
export const OPSETS = { min: 7, max: 17 } as const;

/** An int64 as protobufjs gives it (a Long, or a number), as a number. */
export function int(v: number | { toNumber(): number } | null | undefined): number {
  if (v === null || v === undefined) return 0;
  return typeof v === 'number' ? v : v.toNumber();
}

export interface DecodedModel {
  model: ModelProto;
  graph: GraphProto;
  opset: number;
  producer: string;
}

/** Decodes the bytes of an .onnx file and checks what every later step relies on. */
export function decodeModel(bytes: Uint8Array, file: string): DecodedModel {
  let model: ModelProto;
  try {
    model = onnx.ModelProto.decode(bytes);
  } catch (err) {
    throw new OnnxError(file, `is not an ONNX model: the protobuf does not decode (${(err as Error).message})`);
  }
  const graph = model.graph;
  if (!graph || (graph.node ?? []).length === 0) throw new OnnxError(file, 'is not an ONNX model: it holds no graph, or a graph without nodes');
  const defaultSet = (model.opsetImport ?? []).find((o) => o.domain === undefined || o.domain === null || o.domain === '' || o.domain === 'ai.onnx');
  if (!defaultSet) throw new OnnxError(file, 'imports no operator set of the default ONNX domain');
  const opset = int(defaultSet.version);
  if (opset < OPSETS.min || opset > OPSETS.max) throw new OnnxError(file, `uses operator set ${opset}; plumbline imports operator sets ${OPSETS.min} to ${OPSETS.max}`);
  const producer = [model.producerName, model.producerVersion].filter(Boolean).join(' ') || 'unknown';
  return { model, graph, opset, producer };
}
