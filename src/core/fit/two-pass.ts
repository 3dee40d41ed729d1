// The fit calibrate, replay and listen make: two passes over the same samples, the second keeping only the
// samples near the first pass's ellipse, so that a blocked beam (samples near the centre) or a glitch does not
// pull the fit. The caller feeds the samples once per pass, so a file is read twice and nothing is stored.

import { createCorrection } from '../correction.js';
import { createEllipseAccumulator } from './accumulator.js';
import type { EllipseCalibration, EllipseFitResult } from './ellipse.js';
import { createEllipseFit, type EllipseFitMethodOptions } from './methods.js';

/** Corrected radii kept by the second pass: within [1 − GATE, 1 + GATE] of the first fit's radius. */
const GATE = 0.5;
const CHUNK = 4096;

export interface TwoPassFit {
  /** 1 while every finite sample is summed; 2 while only those near the first pass's ellipse are. */
  readonly pass: 1 | 2;
  /** Adds `length` sample pairs to the current pass. Never allocates. */
  add(x: ArrayLike<number>, y: ArrayLike<number>, length: number): void;
  /**
   * Ends the current pass. After the first: the first fit when it failed, else null, and the caller feeds the
   * same samples again. After the second: the refined fit.
   */
  endPass(): EllipseFitResult | null;
  /** The first pass's ellipse while the second pass runs, else null. */
  readonly gate: EllipseCalibration | null;
  reset(): void;
}

/** Options as `createEllipseFit` (method default 'hyper'). */
export function createTwoPassFit(options: EllipseFitMethodOptions = {}): TwoPassFit {
  const fit = createEllipseFit(options);
  const accumulator = createEllipseAccumulator(options);
  const correction = createCorrection();
  const chunkX = new Float64Array(CHUNK);
  const chunkY = new Float64Array(CHUNK);
  const u = new Float64Array(CHUNK);
  const v = new Float64Array(CHUNK);
  const keptX = new Float64Array(CHUNK);
  const keptY = new Float64Array(CHUNK);
  let gate: EllipseCalibration | null = null;

  function add(x: ArrayLike<number>, y: ArrayLike<number>, length: number): void {
    if (gate === null) {
      accumulator.add(x, y, length);
      return;
    }
    for (let start = 0; start < length; start += CHUNK) {
      const n = Math.min(CHUNK, length - start);
      for (let i = 0; i < n; i++) {
        chunkX[i] = x[start + i]!;
        chunkY[i] = y[start + i]!;
      }
      correction.process(chunkX, chunkY, u, v, n);
      let kept = 0;
      for (let i = 0; i < n; i++) {
        const radius = Math.hypot(u[i]!, v[i]!);
        if (radius >= 1 - GATE && radius <= 1 + GATE) {
          keptX[kept] = chunkX[i]!;
          keptY[kept] = chunkY[i]!;
          kept++;
        }
      }
      accumulator.add(keptX, keptY, kept);
    }
  }

  function endPass(): EllipseFitResult | null {
    const result = fit.solve(accumulator);
    accumulator.reset();
    if (gate !== null || !result.ok) {
      gate = null;
      correction.setCalibration(null);
      return result;
    }
    gate = result.calibration;
    correction.setCalibration(gate);
    return null;
  }

  function reset(): void {
    accumulator.reset();
    gate = null;
    correction.setCalibration(null);
  }

  return {
    add,
    endPass,
    reset,
    get pass() {
      return gate === null ? 1 : 2;
    },
    get gate() {
      return gate;
    },
  };
}
