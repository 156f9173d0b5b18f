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

/**
 * Detaches one throwaway ArrayBuffer, once per thread. V8 compiles typed-array code on the assumption that no
 * buffer has ever been detached in this thread, and throws away all code built on it at the first detach. Growing
 * a WebAssembly memory detaches its old buffer, and so does a worker's transfer of its results; both first happen
 * after the hot loops were compiled, and about 30 of them were then compiled again (`--trace-deopt`: "marking
 * dependent code ... code dependencies"). Done before anything is compiled, the code is built without the
 * assumption from the start; it is what that code runs as after the first detach anyway.
 */
export function detachOnce(): void {
  if (detached) return;
  detached = true;
  const buffer = new ArrayBuffer(8);
  structuredClone(buffer, { transfer: [buffer] });
}
let detached = false;
detachOnce();

/** Grows `memory` to at least `bytes` (64 KiB pages). */
export function reserve(memory: WasmMemory, bytes: number): void {
  if (memory.buffer.byteLength < bytes) memory.grow(Math.ceil((bytes - memory.buffer.byteLength) / 65536));
}
