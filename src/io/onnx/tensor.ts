import { OnnxError, type TensorProto, int } from './model.js';

// TensorProto.DataType values (onnx.proto).
const FLOAT = 1;
const INT32 = 6;
const INT64 = 7;
const DOUBLE = 11;

export interface Constant {
  dims: number[];
  /** The values as float64: a float32 tensor's values are its float32 values exactly. */
  data: Float64Array;
  /** 'float32' or 'float64' for real tensors; 'int' for shapes. */
  type: 'float32' | 'float64' | 'int';
}

const count = (dims: number[]): number => dims.reduce((a, b) => a * b, 1);

/** Reads an initializer or a Constant's value, raw or typed, little-endian. */
export function readTensor(t: TensorProto, file: string): Constant {
  const name = t.name ?? '(unnamed)';
  const dims = (t.dims ?? []).map(int);
  if (dims.some((d) => d < 0)) throw new OnnxError(file, `tensor ${name} has a negative dimension`);
  const n = count(dims);
  if (t.dataLocation === 1) throw new OnnxError(file, `tensor ${name} keeps its data in an external file; export with the weights inside the model`);
  const raw = t.rawData && t.rawData.length > 0 ? Buffer.from(t.rawData.buffer, t.rawData.byteOffset, t.rawData.byteLength) : null;
  const wrongLength = (have: number): OnnxError => new OnnxError(file, `tensor ${name} holds ${have} values but its dimensions [${dims.join(', ')}] need ${n}`);
  const out = new Float64Array(n);
  switch (t.dataType) {
    case FLOAT: {
      if (raw) {
        if (raw.length !== 4 * n) throw wrongLength(raw.length / 4);
        for (let i = 0; i < n; i++) out[i] = raw.readFloatLE(4 * i);
      } else {
        const v = t.floatData ?? [];
        if (v.length !== n) throw wrongLength(v.length);
        // floatData holds float32 values decoded to numbers; Math.fround keeps them float32 exactly.
        for (let i = 0; i < n; i++) out[i] = Math.fround(v[i] as number);
      }
      return { dims, data: out, type: 'float32' };
    }
    case DOUBLE: {
      if (raw) {
        if (raw.length !== 8 * n) throw wrongLength(raw.length / 8);
        for (let i = 0; i < n; i++) out[i] = raw.readDoubleLE(8 * i);
      } else {
        const v = t.doubleData ?? [];
        if (v.length !== n) throw wrongLength(v.length);
        for (let i = 0; i < n; i++) out[i] = v[i] as number;
      }
      return { dims, data: out, type: 'float64' };
    }
    case INT64:
    case INT32: {
      const size = t.dataType === INT64 ? 8 : 4;
      if (raw) {
        if (raw.length !== size * n) throw wrongLength(raw.length / size);
        for (let i = 0; i < n; i++) out[i] = size === 8 ? Number(raw.readBigInt64LE(8 * i)) : raw.readInt32LE(4 * i);
      } else {
        const v = (t.dataType === INT64 ? t.int64Data : t.int32Data) ?? [];
        if (v.length !== n) throw wrongLength(v.length);
        for (let i = 0; i < n; i++) out[i] = int(v[i] as number);
      }
      return { dims, data: out, type: 'int' };
    }
    default:
      throw new OnnxError(file, `tensor ${name} has data type ${t.dataType}; plumbline reads float32 and float64 weights (and int64 shapes)`);
  }
}
