import { section, str, uleb, I32 } from './assembler.js';
import { denseCode } from './dense-kernel.js';
import { solveCode } from './solve-kernel.js';

/**
 * The module's bytes: dense(x, xs, n, w, b, out, os, rows, blocks), dense_relu (the same with relu
 * applied as each sum is stored) and solve(lt, out, n), over an imported memory.
 */
export function kernelModule(): Uint8Array {
  return Uint8Array.from([
    0x00, 0x61, 0x73, 0x6d, 0x01, 0x00, 0x00, 0x00,
    ...section(1, [2, 0x60, ...uleb(9), ...new Array<number>(9).fill(I32), 0, 0x60, ...uleb(3), I32, I32, I32, 0]),
    ...section(2, [1, ...str('env'), ...str('memory'), 0x02, 0x00, 0x01]),
    ...section(3, [3, 0, 1, 0]),
    ...section(7, [3, ...str('dense'), 0x00, 0, ...str('solve'), 0x00, 1, ...str('dense_relu'), 0x00, 2]),
    ...section(10, [3, ...denseCode(), ...solveCode(), ...denseCode(true)]),
  ]);
}

// The WebAssembly global, typed for what is used here (the project's lib settings carry no DOM types).
interface WasmModule {
  readonly kind?: never;
}
export interface WasmMemory {
  readonly buffer: ArrayBuffer;
  grow(pages: number): number;
}
interface WasmApi {
  validate(bytes: Uint8Array): boolean;
  Module: new (bytes: Uint8Array) => WasmModule;
  Instance: new (module: WasmModule, imports: Record<string, Record<string, unknown>>) => { exports: Record<string, unknown> };
  Memory: new (descriptor: { initial: number }) => WasmMemory;
}
const wasm = (globalThis as unknown as { WebAssembly?: WasmApi }).WebAssembly;

export type DenseKernel = (x: number, xs: number, n: number, w: number, b: number, out: number, os: number, rows: number, blocks: number) => void;
export type SolveKernel = (lt: number, out: number, n: number) => void;

/** Which kernel the forward pass and the triangular solve run on, and why when it is not WebAssembly. */
export type KernelStatus = { kind: 'webassembly-simd' } | { kind: 'javascript'; reason: string };

let compiled: { module: WasmModule; api: WasmApi } | { reason: string } | undefined;
function compile(): { module: WasmModule; api: WasmApi } | { reason: string } {
  if (compiled === undefined) {
    try {
      const bytes = kernelModule();
      if (!wasm) compiled = { reason: 'this runtime has no WebAssembly' };
      else if (!wasm.validate(bytes)) compiled = { reason: 'the emitted kernel module does not validate (no WebAssembly SIMD here, or a wrong opcode)' };
      else compiled = { module: new wasm.Module(bytes), api: wasm };
    } catch (err) {
      compiled = { reason: `the kernel module failed to compile: ${(err as Error).message}` };
    }
  }
  return compiled;
}

export function kernelStatus(): KernelStatus {
  const c = compile();
  return 'module' in c ? { kind: 'webassembly-simd' } : { kind: 'javascript', reason: c.reason };
}

export const PAGE = 65536;
export const align16 = (bytes: number): number => Math.ceil(bytes / 16) * 16;

/** An instance of the kernel over a memory of its own; null where the kernel is not available. */
export function instantiateKernel(initialPages: number): { memory: WasmMemory; dense: DenseKernel; denseRelu: DenseKernel; solve: SolveKernel } | null {
  const c = compile();
  if (!('module' in c)) return null;
  const memory = new c.api.Memory({ initial: initialPages });
  const { exports } = new c.api.Instance(c.module, { env: { memory } });
  return { memory, dense: exports.dense as DenseKernel, denseRelu: exports.dense_relu as DenseKernel, solve: exports.solve as SolveKernel };
}
