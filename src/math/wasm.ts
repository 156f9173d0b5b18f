/**
 * The WebAssembly modules of src/math (pair-sums.ts, knn-search.ts): instantiated from their generated base64
 * bytes, one instance per thread, with one growable memory each. V8 compiles a module's code once per process and
 * shares it between worker threads.
 */

/** What src/math uses of the WebAssembly API (the project's TypeScript library settings leave it undeclared). */
export interface WasmMemory {
  buffer: ArrayBuffer;
  grow(pages: number): number;
}

const { WebAssembly: wasm } = globalThis as unknown as {
  WebAssembly: { Module: new (bytes: Uint8Array) => object; Instance: new (module: object) => { exports: Record<string, unknown> } };
};

/** A new instance of the module whose bytes are `base64`: its exports, and its memory (export "memory"). */
export function instantiate(base64: string): { exports: Record<string, unknown>; memory: WasmMemory } {
  const { exports } = new wasm.Instance(new wasm.Module(Buffer.from(base64, 'base64')));
  return { exports, memory: exports.memory as WasmMemory };
}

/** Grows `memory` to at least `bytes` (64 KiB pages). */
export function reserve(memory: WasmMemory, bytes: number): void {
  if (memory.buffer.byteLength < bytes) memory.grow(Math.ceil((bytes - memory.buffer.byteLength) / 65536));
}
