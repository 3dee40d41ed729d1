// Ellipse (Heydemann 1981) fit of quadrature samples in accumulator form: running sums of the monomials
// x^i y^j (i + j <= 4) are all the least-squares conic fit needs, so a fit needs no stored samples and two
// accumulators merge exactly. P. L. M. Heydemann, Applied Optics 20(19), 3382-3384 (1981).

import { createHeydemannSolver } from './conic-solver.js';
import { GRID, GRID_BITS, isOccupied, occupy, type AccumulatorState } from './coverage.js';
import type { EllipseFitResult } from './ellipse.js';
import { fitResult, resolveFitLimits, type EllipseFitOptions } from './limits.js';
import { MOMENT_COUNT, shiftMoments } from './moments.js';

export interface EllipseAccumulator {
  /** Adds `length` sample pairs; non-finite pairs are skipped and counted. Never allocates. */
  add(x: ArrayLike<number>, y: ArrayLike<number>, length: number): void;
  /**
   * Optional (src/accel's accumulator has it; the core's does not, to stay small): the two-pass fit's second pass,
   * the same as `keepWithin` (src/core/fit/two-pass.ts) over each successive 4096 of the `length` pairs, each followed
   * by `add` of the pairs it keeps, to the bit (kept pairs, sums and `near`). With `all`, every pair is also added to
   * `all` as `all.add(x, y, length)` would add it: src/accel's accumulator sums a block once for both while the gate
   * keeps all of it and both sum about the same shift on the same grid (the two-pass fit's provisional second pass).
   */
  addWithin?(
    x: ArrayLike<number>,
    y: ArrayLike<number>,
    length: number,
    coefficients: Float64Array,
    lowRadius: number,
    highRadius: number,
    band: number,
    near: Float64Array,
    all?: EllipseAccumulator,
  ): void;
  /** Adds another accumulator's samples, as if they had been added here. */
  merge(other: EllipseAccumulator): void;
  reset(): void;
  readonly samples: number;
  readonly skippedNonFinite: number;
  /**
   * Solves the least-squares conic fit in a conditioned frame (centred on the samples' centroid, scaled by
   * their RMS distance from it, so int16 counts and unit floats fit equally well), converts it with
   * Heydemann's closed form and checks it.
   *
   * Coverage is the share of 36 phase bins (10° each, corrected phase) reached by the cells of a 128×128
   * occupancy grid of the figure that lie on the fitted ellipse (see `coverageOfFit`): dwelling at one phase
   * neither adds nor removes coverage.
   */
  solve(): EllipseFitResult;
  /** The raw sums, for merging and for the other fit methods. */
  readonly state: AccumulatorState;
}

export function createEllipseAccumulator(options: EllipseFitOptions = {}): EllipseAccumulator {
  const limits = resolveFitLimits(options);
  const solver = createHeydemannSolver();
  const moments = new Float64Array(MOMENT_COUNT);
  const scratch = new Float64Array(MOMENT_COUNT);
  // Sums are kept about the first sample seen, so the powers stay near the signal's own size.
  let shiftX = 0;
  let shiftY = 0;
  let hasShift = false;
  let skippedNonFinite = 0;
  // Coverage comes from an occupancy grid of the figure: GRID×GRID cells over a square about the shift, which
  // doubles in size (merging 2×2 cells) whenever a sample falls outside it. A cell is marked however long the
  // signal stays in it, so dwelling neither adds nor removes coverage, and memory stays fixed.
  const occupancy = new Uint32Array((GRID * GRID) / 32);
  const zoomed = new Uint32Array(occupancy.length);
  let gridHalfWidth = 0;

  function zoomOut(): void {
    zoomed.fill(0);
    for (let index = 0; index < GRID * GRID; index++) {
      if (isOccupied(occupancy, index)) {
        occupy(zoomed, (GRID / 4 + ((index >> GRID_BITS) >> 1)) * GRID + GRID / 4 + ((index & (GRID - 1)) >> 1));
      }
    }
    occupancy.set(zoomed);
    gridHalfWidth *= 2;
  }

  function mark(u: number, v: number): void {
    if (gridHalfWidth === 0) {
      const reach = Math.max(Math.abs(u), Math.abs(v));
      if (reach === 0) return;
      gridHalfWidth = 2 * reach;
      mark(0, 0); // the first sample, at the shift
    }
    while (!(Math.abs(u) < gridHalfWidth && Math.abs(v) < gridHalfWidth)) zoomOut();
    const cellsPerUnit = GRID / (2 * gridHalfWidth);
    const col = Math.floor((u + gridHalfWidth) * cellsPerUnit);
    const row = Math.floor((v + gridHalfWidth) * cellsPerUnit);
    occupy(occupancy, Math.min(GRID - 1, row) * GRID + Math.min(GRID - 1, col));
  }

  function add(x: ArrayLike<number>, y: ArrayLike<number>, length: number): void {
    let s00 = 0, s10 = 0, s01 = 0, s20 = 0, s11 = 0, s02 = 0, s30 = 0, s21 = 0, s12 = 0, s03 = 0;
    let s40 = 0, s31 = 0, s22 = 0, s13 = 0, s04 = 0;
    for (let i = 0; i < length; i++) {
      const xi = x[i]!;
      const yi = y[i]!;
      if (!(Number.isFinite(xi) && Number.isFinite(yi))) {
        skippedNonFinite++;
        continue;
      }
      if (!hasShift) {
        shiftX = xi;
        shiftY = yi;
        hasShift = true;
      }
      const u = xi - shiftX;
      const v = yi - shiftY;
      const uu = u * u;
      const uv = u * v;
      const vv = v * v;
      s00 += 1;
      s10 += u;
      s01 += v;
      s20 += uu;
      s11 += uv;
      s02 += vv;
      s30 += uu * u;
      s21 += uu * v;
      s12 += u * vv;
      s03 += vv * v;
      s40 += uu * uu;
      s31 += uu * uv;
      s22 += uu * vv;
      s13 += uv * vv;
      s04 += vv * vv;
      mark(u, v);
    }
    moments[0] += s00;
    moments[1] += s10;
    moments[2] += s01;
    moments[3] += s20;
    moments[4] += s11;
    moments[5] += s02;
    moments[6] += s30;
    moments[7] += s21;
    moments[8] += s12;
    moments[9] += s03;
    moments[10] += s40;
    moments[11] += s31;
    moments[12] += s22;
    moments[13] += s13;
    moments[14] += s04;
  }

  function merge(other: EllipseAccumulator): void {
    const theirs = other.state;
    skippedNonFinite += other.skippedNonFinite;
    if (theirs.moments[0] === 0) return;
    const incoming = Float64Array.from(theirs.moments);
    if (!hasShift) {
      shiftX = theirs.shiftX;
      shiftY = theirs.shiftY;
      hasShift = true;
    } else {
      shiftMoments(incoming, theirs.shiftX - shiftX, theirs.shiftY - shiftY, scratch);
    }
    for (let k = 0; k < MOMENT_COUNT; k++) moments[k] += incoming[k]!;
    const d = theirs.shiftX - shiftX;
    const e = theirs.shiftY - shiftY;
    const cell = (2 * theirs.gridHalfWidth) / GRID;
    for (let index = 0; index < GRID * GRID; index++) {
      if (isOccupied(theirs.occupancy, index)) {
        mark(-theirs.gridHalfWidth + ((index & (GRID - 1)) + 0.5) * cell + d, -theirs.gridHalfWidth + ((index >> GRID_BITS) + 0.5) * cell + e);
      }
    }
  }

  function solve(): EllipseFitResult {
    return fitResult(solver, state(), limits);
  }

  function state(): AccumulatorState {
    return { shiftX, shiftY, moments, occupancy, gridHalfWidth };
  }

  function reset(): void {
    moments.fill(0);
    occupancy.fill(0);
    gridHalfWidth = 0;
    hasShift = false;
    skippedNonFinite = 0;
  }

  reset();
  return {
    add,
    merge,
    reset,
    solve,
    get samples() {
      return moments[0]!;
    },
    get skippedNonFinite() {
      return skippedNonFinite;
    },
    get state() {
      return state();
    },
  };
}
