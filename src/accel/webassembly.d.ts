// The little of the WebAssembly JavaScript API that front-end.ts uses. The project's lib is ES2020 with Node
// types, neither of which declares WebAssembly; engines that lack it make `createWasmFrontEnd` return null.
declare namespace WebAssembly {
  class Module {
    constructor(bytes: Uint8Array);
  }
  class Instance {
    constructor(module: Module, imports: Record<string, Record<string, unknown>>);
    readonly exports: Record<string, unknown>;
  }
  class Memory {
    /** `shared`: backed by a SharedArrayBuffer, for threads (then `maximum` is required). */
    constructor(descriptor: { initial: number; maximum?: number; shared?: boolean });
    /** A SharedArrayBuffer for a shared memory. */
    readonly buffer: ArrayBuffer;
    grow(deltaPages: number): number;
  }
}
