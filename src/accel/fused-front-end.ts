// A plain-JavaScript front end: the correction, the level, the quiet-block checks and the arctangent in one
// loop instead of three passes. It computes exactly what the pipeline's stages compute, operation for
// operation, so its results are theirs to the bit; it only saves the passes over memory between them.
// Where WebAssembly SIMD is missing, it is the fallback: `createWasmFrontEnd() ?? createFusedFrontEnd()`.
import { fastAtan2, integerInRange, type FrontEnd, type SampleArray } from '../core/index.js';

export interface FusedFrontEndOptions {
  /** Samples per block to reserve the phase array for; it grows to the largest block seen. Default 4096. */
  readonly capacity?: number;
}

export function createFusedFrontEnd(options: FusedFrontEndOptions = {}): FrontEnd {
  let phases = new Float64Array(integerInRange('capacity', options.capacity ?? 4096, 1, 2 ** 28));
  return {
    process(x: SampleArray, y: SampleArray, length: number, coefficients: Float64Array, low: number, high: number, minLevel: number, level: Float32Array): Float64Array | null {
      if (length > phases.length) phases = new Float64Array(length);
      const out = phases;
      const ux = coefficients[0]!, u0 = coefficients[1]!, vx = coefficients[2]!, vy = coefficients[3]!, v0 = coefficients[4]!;
      for (let i = 0; i < length; i++) {
        const xi = x[i]!;
        const yi = y[i]!;
        // The correction's, the monitor's and the tracker's expressions, in their order (see their stages).
        const u = ux * xi + u0;
        const v = vx * xi + vy * yi + v0;
        const lev = Math.sqrt(u * u + v * v);
        // A non-finite sample fails the level test (NaN) or the code test (±Infinity).
        if (!(lev >= minLevel) || xi <= low || xi >= high || yi <= low || yi >= high) return null;
        level[i] = lev;
        out[i] = fastAtan2(v, u);
      }
      return out;
    },
  };
}
