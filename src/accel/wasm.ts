// Instantiating the project's WebAssembly modules (their bytes are base64 in the generated *-wasm.ts files).

function decode(base64: string): Uint8Array<ArrayBuffer> {
  const text = atob(base64);
  const bytes = new Uint8Array(text.length);
  for (let i = 0; i < text.length; i++) bytes[i] = text.charCodeAt(i);
  return bytes;
}

const compiled = new Map<string, WebAssembly.Module>();

/**
 * A new instance of the module in `base64` (compiled once per process), or null when this engine lacks
 * WebAssembly or its SIMD extension: the caller then keeps its JavaScript loops.
 */
export function instantiate<T>(base64: string, imports: Record<string, Record<string, WebAssembly.Memory>> = {}): T | null {
  try {
    let module = compiled.get(base64);
    if (module === undefined) {
      module = new WebAssembly.Module(decode(base64));
      compiled.set(base64, module);
    }
    return new WebAssembly.Instance(module, imports).exports as unknown as T;
  } catch {
    return null; // no WebAssembly SIMD here (or no shared memory, for a module that imports one)
  }
}
