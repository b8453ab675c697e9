import { createHash } from 'node:crypto';
import { readFile } from 'node:fs/promises';
import type { Standardizer } from '../../core/standardize.js';
import { readChain } from './graph.js';
import { type LoweredGraph, lowerChain } from './lower.js';
import { OnnxError, decodeModel } from './model.js';

export { OnnxError } from './model.js';
export { SUPPORTED_OPS } from './graph.js';

export interface ImportedGraph extends LoweredGraph {
  /** sha256 of the .onnx file's bytes. */
  sha256: string;
  producer: string;
  opset: number;
  /** The element type of the graph's input; the bundle serves float32 weights either way. */
  inputType: 'float32' | 'float64';
  /** The ONNX ops of the graph, sorted, for the record. */
  ops: string[];
}

/** Reads an ONNX feed-forward classifier into dense layers, or refuses it naming why. */
export function importOnnx(bytes: Uint8Array, file: string, preprocess?: Standardizer): ImportedGraph {
  const { graph, opset, producer } = decodeModel(bytes, file);
  const chain = readChain(graph, opset, file);
  const lowered = lowerChain(chain, file, preprocess);
  return {
    ...lowered,
    sha256: createHash('sha256').update(bytes).digest('hex'),
    producer,
    opset,
    inputType: chain.input.type,
    ops: [...new Set((graph.node ?? []).map((n) => n.opType ?? ''))].sort(),
  };
}

export async function readOnnx(path: string, preprocess?: Standardizer): Promise<ImportedGraph> {
  let bytes: Buffer;
  try {
    bytes = await readFile(path);
  } catch (err) {
    throw new OnnxError(path, `cannot be read (${(err as NodeJS.ErrnoException).code ?? (err as Error).message})`);
  }
  return importOnnx(bytes, path, preprocess);
}
