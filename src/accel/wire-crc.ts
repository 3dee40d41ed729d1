// The wire decoder's frame check in WebAssembly (wire-crc.wat): CRC-32C by slicing-by-16 over bytes in the kernel's
// memory, the same value as the JavaScript CRC at about a third of its time. The decoder keeps its bytes there.
import { integerInRange } from '../core/index.js';
import { WIRE_CRC_WASM_BASE64 } from './wire-crc-wasm.js';
import { instantiate } from './wasm.js';

interface KernelExports {
  readonly memory: WebAssembly.Memory;
  init(): void;
  crc(start: number, end: number): number;
}

export interface WireCrcKernel {
  /** The caller's bytes, `byteCapacity` of them in the kernel's memory (at an offset that is a multiple of 8). */
  readonly bytes: Uint8Array;
  /** CRC-32C of `bytes[start, end)` (CRC-32/ISCSI), unsigned. */
  crc32c(start: number, end: number): number;
}

/** The tables below the caller's bytes (wire-crc.wat). */
const TABLES_BYTES = 16_384;
const PAGE_BYTES = 65_536;

/** A kernel with room for `byteCapacity` bytes (1..2^28), or null where WebAssembly is missing. */
export function createWireCrcKernel(byteCapacity: number): WireCrcKernel | null {
  integerInRange('byteCapacity', byteCapacity, 1, 2 ** 28);
  const instance = instantiate<KernelExports>(WIRE_CRC_WASM_BASE64);
  if (instance === null) return null;
  const kernel: KernelExports = instance;
  try {
    // All memory at once: growing later would detach the view handed out below.
    kernel.memory.grow(Math.ceil((TABLES_BYTES + byteCapacity) / PAGE_BYTES) - kernel.memory.buffer.byteLength / PAGE_BYTES);
  } catch {
    return null; // no room for WebAssembly memory of this size here
  }
  kernel.init();
  const crc = kernel.crc;
  return {
    bytes: new Uint8Array(kernel.memory.buffer, TABLES_BYTES, byteCapacity),
    crc32c: (start, end) => crc(start + TABLES_BYTES, end + TABLES_BYTES) >>> 0,
  };
}
