// For the fit accumulators' property tests: invented samples (runs of pairs stepping along an invented ellipse at
// drawn radii, each run's first y possibly a glitch, a non-finite or far value, as integers or not; pairs of the
// unit circle hugging the two-pass fit's gate bounds) and the comparison of two accumulators' states, bit for bit.
import { expect } from 'vitest';
import fc from 'fast-check';
import type { EllipseAccumulator, EllipseCalibration } from '../../src/core/index.js';

export interface EllipseRunsOptions {
  /** The radii the runs are drawn at (1 = on the ellipse). */
  readonly radius: fc.Arbitrary<number>;
  /** Values a run's first y may be replaced by. */
  readonly glitches: readonly number[];
  /** Longest run, pairs; runs cross the kernels' 4096-pair chunks when long. */
  readonly maxRepeat: number;
  /** Most runs. */
  readonly maxRuns: number;
}

export function ellipseRuns(ellipse: EllipseCalibration, options: EllipseRunsOptions): fc.Arbitrary<{ x: Float64Array; y: Float64Array }> {
  return fc
    .array(
      fc.record({
        phase: fc.double({ min: -4, max: 4, noNaN: true }),
        radius: options.radius,
        glitch: fc.oneof(fc.constant(null), fc.constant(null), fc.constantFrom(...options.glitches)),
        integer: fc.boolean(),
        repeat: fc.oneof(fc.constant(1), fc.integer({ min: 1, max: options.maxRepeat })),
      }),
      { minLength: 0, maxLength: options.maxRuns },
    )
    .map((points) => {
      const x: number[] = [];
      const y: number[] = [];
      for (const { phase, radius, glitch, integer, repeat } of points) {
        const at = (value: number) => (integer ? Math.round(value) : value);
        for (let k = 0; k < repeat; k++) {
          const p = phase + k * 0.01;
          x.push(at(ellipse.offsetX + ellipse.amplitudeX * radius * Math.cos(p)));
          y.push(k === 0 && glitch !== null ? glitch : at(ellipse.offsetY + ellipse.amplitudeY * radius * Math.sin(p + ellipse.phaseErrorRad)));
        }
      }
      return { x: Float64Array.from(x), y: Float64Array.from(y) };
    });
}

/**
 * Pairs of the unit circle within a few ulps of radius 0.5 or 1.5 (the two-pass fit's gate bounds), where u² + v²
 * alone decides otherwise than Math.hypot for about one in a few hundred.
 */
export function huggingTheGate(minLength: number, maxLength: number): fc.Arbitrary<{ x: Float64Array; y: Float64Array }> {
  return fc
    .array(fc.tuple(fc.double({ min: 0, max: 7, noNaN: true }), fc.double({ min: -4e-16, max: 4e-16, noNaN: true }), fc.boolean()), { minLength, maxLength })
    .map((points) => {
      const x = new Float64Array(points.length);
      const y = new Float64Array(points.length);
      points.forEach(([angle, relative, outer], i) => {
        const radius = (outer ? 1.5 : 0.5) * (1 + relative);
        [x[i], y[i]] = [radius * Math.cos(angle), radius * Math.sin(angle)];
      });
      return { x, y };
    });
}

const toInt16 = (value: number) => (Number.isNaN(value) ? 0 : Math.max(-32768, Math.min(32767, Math.round(value))));

/**
 * The samples as the reference accumulator takes them (x, y) and as the one tested takes them (fx, fy): half the
 * time the same arrays, half the time rounded and clamped to int16 (non-finite values as 0 or the bounds), given to
 * the one tested as Int16Array and to the reference as the same values in Float64Array.
 */
export function sometimesInt16(
  samples: fc.Arbitrary<{ x: Float64Array; y: Float64Array }>,
): fc.Arbitrary<{ x: Float64Array; y: Float64Array; fx: Float64Array | Int16Array; fy: Float64Array | Int16Array }> {
  return fc.tuple(samples, fc.boolean()).map(([{ x, y }, int16]) => {
    if (!int16) return { x, y, fx: x, fy: y };
    const fx = Int16Array.from(x, toInt16);
    const fy = Int16Array.from(y, toInt16);
    return { x: Float64Array.from(fx), y: Float64Array.from(fy), fx, fy };
  });
}

/** The same sums, grid, shift and counts, bit for bit. */
export function expectSameState(actual: EllipseAccumulator, expected: EllipseAccumulator): void {
  const [a, e] = [actual.state, expected.state];
  expect([a.shiftX, a.shiftY, a.gridHalfWidth]).toEqual([e.shiftX, e.shiftY, e.gridHalfWidth]);
  expect(Array.from(a.moments)).toEqual(Array.from(e.moments));
  expect(Array.from(a.occupancy)).toEqual(Array.from(e.occupancy));
  expect(actual.skippedNonFinite).toBe(expected.skippedNonFinite);
  expect(actual.samples).toBe(expected.samples);
}
