// An accelerated front end for the pipeline: correction, level, the quiet-block checks and the arctangent in a
// WebAssembly SIMD kernel (front-end.wat) for int16 samples (and, exact kernel only, float64 ones). The pipeline falls back to its JavaScript stages
// for any block the kernel declines (not quiet, other sample types), and wherever WebAssembly SIMD is missing
// `createWasmFrontEnd` returns null: the caller then leaves `frontEnd` unset and the plain pipeline runs.
import type { FrontEnd, SampleArray } from '../core/index.js';
import { FRONT_END_WASM_BASE64 } from './front-end-wasm.js';
import { instantiate } from './wasm.js';

/**
 * `f32` (default, fastest): f32x4 lanes; phase within `F32_MAX_PHASE_ERROR_RAD` of `fastAtan2`, level within
 * `F32_MAX_LEVEL_RELATIVE_ERROR`; blocks whose alarms could turn on that error are declined, so flags and events
 * are the plain pipeline's. `f64-exact`: f64x2 lanes, level and phase identical to the JavaScript stages to the
 * bit, also with velocity-aided unwrapping (which the f32 kernel always declines), for Int16Array and Float64Array
 * samples (the capture readers' blocks are Float64Array).
 */
export type WasmFrontEndPrecision = 'f32' | 'f64-exact';

/**
 * Largest difference of the f32 kernel's phase from Math.atan2 (and from fastAtan2) of the exact corrected
 * u, v, for int16 codes, rad: 2.1e-7 measured over 24 million codes on 12 calibrations (tests/accel checks a
 * dense grid), stated with headroom. At 633 nm and fold 2 (5.04e-8 m/rad) that is 0.015 pm of position.
 */
export const F32_MAX_PHASE_ERROR_RAD = 3e-7;

/** Largest relative difference of the f32 kernel's level from the JavaScript stages' (2.6e-7 measured). */
export const F32_MAX_LEVEL_RELATIVE_ERROR = 1e-6;

/**
 * Margin of the f32 kernel's decline checks: levels under minLevel·(1 + margin) and steps over the guard minus
 * margin (rad) go to the JavaScript stages. Far above the errors above, and costs nothing on real signals.
 */
const DECLINE_MARGIN = 1e-5;

export interface WasmFrontEnd extends FrontEnd {
  readonly precision: WasmFrontEndPrecision;
}

export interface WasmFrontEndOptions {
  /** Samples per block to reserve memory for at once; it grows to the largest block seen. Default 4096. */
  readonly capacity?: number;
  /** Default `f32`. */
  readonly precision?: WasmFrontEndPrecision;
}

interface KernelExports {
  readonly memory: WebAssembly.Memory;
  front_f32(
    n: number, xPtr: number, yPtr: number, levelPtr: number, phasePtr: number,
    ux: number, u0: number, vx: number, vy: number, v0: number,
    below: number, above: number, minLevel: number, lastPhase: number, maxStep: number,
  ): number;
  front_f64(
    n: number, wide: number, xPtr: number, yPtr: number, levelPtr: number, phasePtr: number,
    ux: number, u0: number, vx: number, vy: number, v0: number, low: number, high: number, minLevel: number,
  ): number;
}

/** The kernel, or null when this engine lacks WebAssembly or its SIMD extension. */
export function createWasmFrontEnd(options: WasmFrontEndOptions = {}): WasmFrontEnd | null {
  const precision = options.precision ?? 'f32';
  const instance = instantiate<KernelExports>(FRONT_END_WASM_BASE64);
  if (instance === null) return null; // the caller keeps the JavaScript stages
  const kernel: KernelExports = instance;
  const exact = precision === 'f64-exact';
  let capacity = 0;
  // Memory layout, each region aligned: phases (f64), levels (f32), x and y samples (i16, or f64 for the exact
  // kernel's Float64Array blocks: each region has room for either).
  let phases = new Float64Array(0);
  let levels = new Float32Array(0);
  let xs = new Int16Array(0);
  let ys = xs;
  let xsWide = phases;
  let ysWide = phases;
  // Views of exactly the last block's length, for the level copy-out; remade only when the length changes.
  let levelView = levels;
  let viewLength = -1;

  function reserve(samples: number): void {
    capacity = Math.ceil(samples / 8) * 8; // the kernel works on groups of 4 (f32) or 2 (f64)
    const pages = Math.ceil((28 * capacity) / 65536) - kernel.memory.buffer.byteLength / 65536;
    if (pages > 0) kernel.memory.grow(pages);
    const buffer = kernel.memory.buffer;
    phases = new Float64Array(buffer, 0, capacity);
    levels = new Float32Array(buffer, 8 * capacity, capacity);
    xs = new Int16Array(buffer, 12 * capacity, capacity);
    ys = new Int16Array(buffer, 20 * capacity, capacity);
    xsWide = new Float64Array(buffer, 12 * capacity, capacity);
    ysWide = new Float64Array(buffer, 20 * capacity, capacity);
    viewLength = -1;
  }
  reserve(options.capacity ?? 4096);

  function process(
    x: SampleArray, y: SampleArray, length: number, c: Float64Array, low: number, high: number, minLevel: number,
    level: Float32Array, lastPhaseRad: number, stepGuardRad: number,
  ): Float64Array | null {
    // Other sample types take the JavaScript stages; so does a block the f32 kernel could not decide safely.
    if (length <= 0) return null;
    const wide = exact && x instanceof Float64Array && y instanceof Float64Array;
    if (!wide && !(x instanceof Int16Array && y instanceof Int16Array)) return null;
    if (!exact && !(stepGuardRad > DECLINE_MARGIN)) return null;
    if (length > capacity) reserve(length);
    // Typed-array set is a memcpy. Samples past the block are copied along when they fit (the kernel reads only
    // the block and its padding); a view is made only for a caller's array longer than the reserved memory.
    // Padded to the kernel's group with the last sample: same checks, zero step.
    const padded = Math.ceil(length / 4) * 4;
    if (wide) {
      copyPadded(xsWide, x, length, padded);
      copyPadded(ysWide, y, length, padded);
    } else {
      copyPadded(xs, x, length, padded);
      copyPadded(ys, y, length, padded);
    }
    const quiet = exact
      ? kernel.front_f64(padded, wide ? 1 : 0, xs.byteOffset, ys.byteOffset, levels.byteOffset, phases.byteOffset,
          c[0]!, c[1]!, c[2]!, c[3]!, c[4]!, low, high, minLevel)
      : runF32(padded, c, low, high, minLevel, lastPhaseRad, stepGuardRad);
    if (quiet === 0) return null;
    if (viewLength !== length) {
      levelView = levels.subarray(0, length);
      viewLength = length;
    }
    level.set(levelView);
    return phases;
  }

  function copyPadded(to: Int16Array | Float64Array, from: SampleArray, length: number, padded: number): void {
    to.set(from.length <= capacity ? from : from.subarray(0, length));
    if (padded > length) to.fill(from[length - 1]!, length, padded);
  }

  function runF32(padded: number, c: Float64Array, low: number, high: number, minLevel: number, lastPhaseRad: number, stepGuardRad: number): number {
    // Integer codes: x <= low ⇔ x < floor(low) + 1, x >= high ⇔ x > ceil(high) − 1. Clamped to the int16
    // range these stay exact, except when every code would be saturated (then decline).
    const below = Math.floor(low) + 1;
    const above = Math.ceil(high) - 1;
    if (below > 32767 || above < -32768) return 0;
    return kernel.front_f32(padded, xs.byteOffset, ys.byteOffset, levels.byteOffset, phases.byteOffset,
      c[0]!, c[1]!, c[2]!, c[3]!, c[4]!,
      Math.max(below, -32768), Math.min(above, 32767), minLevel * (1 + DECLINE_MARGIN), lastPhaseRad, stepGuardRad - DECLINE_MARGIN);
  }

  return { precision, process };
}
