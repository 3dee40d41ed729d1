// The WAV reader's decoding of adjacent int16 x and y channels into f64 blocks, in WebAssembly SIMD (int16-widen.wat).
import { INT16_WIDEN_WASM_BASE64 } from './int16-widen-wasm.js';
import { instantiate } from './wasm.js';

interface KernelExports {
  readonly memory: WebAssembly.Memory;
  widen(source: number, stride: number, frames: number, xAt: number, yAt: number): void;
  split(source: number, stride: number, frames: number, xAt: number, yAt: number): void;
}

export interface Int16Widener {
  /** The kernel's memory, of at least the bytes asked for; it never grows again, so views of it stay valid. */
  readonly memory: ArrayBuffer;
  /**
   * Decodes `frames` little-endian frames of `stride` bytes from byte `source` of the memory (the first frame's x,
   * its y the next two bytes) into the f64 arrays at bytes `xAt` and `yAt`.
   */
  widen(source: number, stride: number, frames: number, xAt: number, yAt: number): void;
  /** The same frames into int16 arrays at bytes `xAt` and `yAt`, as stored. */
  split(source: number, stride: number, frames: number, xAt: number, yAt: number): void;
}

/** The kernel over a memory of at least `bytes`, or null without WebAssembly SIMD (or that much memory). */
export function createInt16Widener(bytes: number): Int16Widener | null {
  const kernel = instantiate<KernelExports>(INT16_WIDEN_WASM_BASE64);
  if (kernel === null) return null;
  try {
    const pages = Math.ceil(bytes / 65536) - kernel.memory.buffer.byteLength / 65536;
    if (pages > 0) kernel.memory.grow(pages);
  } catch {
    return null;
  }
  return { memory: kernel.memory.buffer, widen: kernel.widen, split: kernel.split };
}
