import { OnnxError, type TensorProto, int } from './model.js';

// TensorProto.DataType values (onnx.proto).
const FLOAT = 1;
const INT32 = 6;
const INT64 = 7;
const BOOL = 9;
const DOUBLE = 11;

/** The most values one tensor may hold (a 4096 x 4096 layer): a larger one is refused before anything is allocated. */
export const MAX_TENSOR_VALUES = 1 << 24;

export interface Constant {
  dims: number[];
  /** The values as float64: a float32 tensor's values are its float32 values exactly. */
  data: Float64Array;
  /** 'float32' or 'float64' for real tensors; 'int' for shapes and flags (bool is 0 or 1). */
  type: 'float32' | 'float64' | 'int';
}

const count = (dims: number[]): number => dims.reduce((a, b) => a * b, 1);

/** Reads an initializer or a Constant's value, raw or typed, little-endian. */
export function readTensor(t: TensorProto, file: string): Constant {
  const name = t.name ?? '(unnamed)';
  const dims = (t.dims ?? []).map(int);
  if (dims.some((d) => d < 0)) throw new OnnxError(file, `tensor ${name} has a negative dimension`);
  const n = count(dims);
  if (!Number.isSafeInteger(n) || n > MAX_TENSOR_VALUES) throw new OnnxError(file, `tensor ${name} has dimensions [${dims.join(', ')}], more than the ${MAX_TENSOR_VALUES} values plumbline reads in one tensor`);
  if (t.dataLocation === 1) throw new OnnxError(file, `tensor ${name} keeps its data in an external file; export with the weights inside the model`);
  const raw = t.rawData && t.rawData.length > 0 ? Buffer.from(t.rawData.buffer, t.rawData.byteOffset, t.rawData.byteLength) : null;
  // Lengths are checked before anything is allocated.
  const check = (have: number, size: number): void => {
    if (raw ? raw.length !== size * n : have !== n) {
      throw new OnnxError(file, raw ? `tensor ${name} holds ${raw.length} bytes but its dimensions [${dims.join(', ')}] need ${size * n}` : `tensor ${name} holds ${have} values but its dimensions [${dims.join(', ')}] need ${n}`);
    }
  };
  switch (t.dataType) {
    case FLOAT: {
      check((t.floatData ?? []).length, 4);
      const out = new Float64Array(n);
      if (raw) {
        for (let i = 0; i < n; i++) out[i] = raw.readFloatLE(4 * i);
      } else {
        const v = t.floatData ?? [];
        // floatData holds float32 values decoded to numbers; Math.fround keeps them float32 exactly.
        for (let i = 0; i < n; i++) out[i] = Math.fround(v[i] as number);
      }
      return { dims, data: out, type: 'float32' };
    }
    case DOUBLE: {
      check((t.doubleData ?? []).length, 8);
      const out = new Float64Array(n);
      if (raw) {
        for (let i = 0; i < n; i++) out[i] = raw.readDoubleLE(8 * i);
      } else {
        const v = t.doubleData ?? [];
        for (let i = 0; i < n; i++) out[i] = v[i] as number;
      }
      return { dims, data: out, type: 'float64' };
    }
    case INT64:
    case INT32:
    case BOOL: {
      // bool is one byte a value raw, and int32_data typed (onnx.proto).
      const size = t.dataType === INT64 ? 8 : t.dataType === BOOL ? 1 : 4;
      const typed = (t.dataType === INT64 ? t.int64Data : t.int32Data) ?? [];
      check(typed.length, size);
      const out = new Float64Array(n);
      if (raw) {
        for (let i = 0; i < n; i++) out[i] = size === 8 ? Number(raw.readBigInt64LE(8 * i)) : size === 1 ? raw.readUInt8(i) : raw.readInt32LE(4 * i);
      } else {
        for (let i = 0; i < n; i++) out[i] = int(typed[i] as number);
      }
      return { dims, data: out, type: 'int' };
    }
    default:
      throw new OnnxError(file, `tensor ${name} has data type ${t.dataType}; plumbline reads float32 and float64 weights (and int64 shapes, bool flags)`);
  }
}
