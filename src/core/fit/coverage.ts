// How much of the fringe a fit saw: an occupancy grid of the figure, fixed in size, read against the fitted ellipse.

import { TWO_PI } from '../phase.js';
import type { EllipseCalibration } from './ellipse.js';

/** Cells per side of the coverage grid (2^GRID_BITS; cell index = row·GRID + col), and the phase bins coverage is counted in (10° each). */
export const GRID_BITS = 7;
export const GRID = 1 << GRID_BITS;
const COVERAGE_BINS = 36;

/** The raw sums of an accumulator, for merging and for coverage: sums of (x − shiftX)^i (y − shiftY)^j. */
export interface AccumulatorState {
  readonly shiftX: number;
  readonly shiftY: number;
  readonly moments: Float64Array;
  /**
   * The coverage grid: GRID×GRID cells over [−gridHalfWidth, gridHalfWidth]² about the shift (row = v), as
   * bits: bit `cell & 31` of word `cell >> 5` is set when cell `row·GRID + col` was reached.
   */
  readonly occupancy: Uint32Array;
  readonly gridHalfWidth: number;
}

/**
 * The share of COVERAGE_BINS equal phase bins (corrected phase) reached by the occupied cells of an
 * accumulator's grid that lie on the given ellipse (cells inside it, e.g. from a blocked beam, say nothing of
 * the phase). A cell marks every bin its corners span: the figure passed through the cell, and a cell can be
 * wider than a bin, so marking only the bin of its centre would leave holes in a full fringe. A partial arc
 * is over-counted by at most one cell at each end.
 */
export function coverageOfFit(state: AccumulatorState, calibration: EllipseCalibration): number {
  const { shiftX, shiftY, occupancy, gridHalfWidth } = state;
  const { offsetX, offsetY, amplitudeX, amplitudeY, phaseErrorRad } = calibration;
  const tanE = Math.tan(phaseErrorRad);
  const secE = 1 / Math.cos(phaseErrorRad);
  const cell = (2 * gridHalfWidth) / GRID;
  const hit = new Uint8Array(COVERAGE_BINS);
  for (let index = 0; index < GRID * GRID; index++) {
    if (!isOccupied(occupancy, index)) continue;
    // Point k of the cell on the corrected circle: its centre (k = 4), then its corners, whose phases are
    // taken relative to the centre's (atan2 of cross and dot products, so no wrapping is needed).
    let centreU = 0;
    let centreV = 0;
    let low = 0;
    let high = 0;
    for (let k = 4; k >= 0; k--) {
      const u = (shiftX - gridHalfWidth + ((index & (GRID - 1)) + (k > 3 ? 0.5 : k & 1)) * cell - offsetX) / amplitudeX;
      const v = ((shiftY - gridHalfWidth + ((index >> GRID_BITS) + (k > 3 ? 0.5 : k >> 1)) * cell - offsetY) / amplitudeY) * secE - u * tanE;
      if (k > 3) {
        centreU = u;
        centreV = v;
      } else {
        const offset = Math.atan2(centreU * v - centreV * u, centreU * u + centreV * v);
        low = Math.min(low, offset);
        high = Math.max(high, offset);
      }
    }
    if (Math.abs(Math.hypot(centreU, centreV) - 1) > 0.3) continue;
    const centre = Math.atan2(centreV, centreU) + Math.PI;
    for (let bin = Math.floor(((centre + low) * COVERAGE_BINS) / TWO_PI); bin <= ((centre + high) * COVERAGE_BINS) / TWO_PI; bin++) {
      hit[(bin + COVERAGE_BINS) % COVERAGE_BINS] = 1;
    }
  }
  return hit.reduce((hits, bin) => hits + bin, 0) / COVERAGE_BINS;
}

/** 1 when the cell was reached, else 0. */
export function isOccupied(bits: Uint32Array, cell: number): number {
  return (bits[cell >> 5]! >>> (cell & 31)) & 1;
}

export function occupy(bits: Uint32Array, cell: number): void {
  bits[cell >> 5]! |= 1 << (cell & 31);
}
