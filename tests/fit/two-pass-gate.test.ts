// The second pass's gate (keepWithin) against its plain formulation: correct the pairs, keep those whose
// Math.hypot radius lies within the bounds, count those within a band of the bounds. The kept pairs must be the same, in the same order, bit for bit, also
// within an ulp of the bounds, where u² + v² alone would decide otherwise. Samples are invented: points of an
// invented ellipse at drawn radii (on the gate's bounds too), glitches and non-finite values.
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { createCorrection, type EllipseCalibration } from '../../src/core/index.js';
import { keepWithin } from '../../src/core/fit/two-pass.js';
import '../support/property-seed.js';
import { huggingTheGate } from '../support/fit-accumulators.js';

const ellipse: EllipseCalibration = { offsetX: 37, offsetY: -21, amplitudeX: 9000, amplitudeY: 7600, phaseErrorRad: 0.3 };

/** Pairs of the invented ellipse at drawn phases and radii (the gate's bounds and their neighbours among them), with glitches. */
const ellipseSamples = fc
  .array(
    fc.record({
      phase: fc.double({ min: -4, max: 4, noNaN: true }),
      radius: fc.oneof(
        fc.constantFrom(0, 0.5, 1.5, 0.5 * (1 + 2 ** -52), 0.5 * (1 - 2 ** -52), 1.5 * (1 + 2 ** -52), 1.5 * (1 - 2 ** -52), 0.5 * (1 + 1e-7), 1.5 * (1 - 1e-7)),
        fc.double({ min: 0, max: 3, noNaN: true }),
      ),
      glitch: fc.oneof(fc.constant(null), fc.constantFrom(Number.NaN, Infinity, -Infinity, 3e5, -1e9, 1e300)),
      integer: fc.boolean(),
    }),
    { minLength: 1, maxLength: 400 },
  )
  .map((points) => {
    const x = new Float64Array(points.length);
    const y = new Float64Array(points.length);
    points.forEach(({ phase, radius, glitch, integer }, i) => {
      const at = (value: number) => (integer ? Math.round(value) : value);
      x[i] = at(ellipse.offsetX + ellipse.amplitudeX * radius * Math.cos(phase));
      y[i] = glitch ?? at(ellipse.offsetY + ellipse.amplitudeY * radius * Math.sin(phase + ellipse.phaseErrorRad));
    });
    return { x, y };
  });

/** keepWithin over [start, end) against correcting the pairs and keeping those Math.hypot puts within [0.5, 1.5]. */
function checkGate(calibration: EllipseCalibration, x: Float64Array, y: Float64Array, start: number, end: number): number {
  const correction = createCorrection({ calibration });
  const keptX = new Float64Array(x.length), keptY = new Float64Array(x.length);
  const near = new Float64Array([3]);
  const kept = keepWithin(x, y, start, end, correction.coefficients, 0.5, 1.5, keptX, keptY, 0.02, near);
  const u = new Float64Array(end - start), v = new Float64Array(end - start);
  correction.process(x.subarray(start, end), y.subarray(start, end), u, v, end - start);
  const plainX: number[] = [], plainY: number[] = [];
  for (let i = 0; i < end - start; i++) {
    const radius = Math.hypot(u[i]!, v[i]!);
    if (radius >= 0.5 && radius <= 1.5) [plainX.push(x[start + i]!), plainY.push(y[start + i]!)];
  }
  // The pairs within 0.02 of either bound are added to near (from 3): all those within 0.02·(1 − 1e-9) of one, none beyond 0.02·(1 + 1e-9).
  const within = (band: number) => Array.from(u, (ui, i) => Math.hypot(ui, v[i]!)).filter((r) => Math.abs(r - 0.5) <= band || Math.abs(r - 1.5) <= band).length;
  expect(near[0]! - 3).toBeGreaterThanOrEqual(within(0.02 * (1 - 1e-9)));
  expect(near[0]! - 3).toBeLessThanOrEqual(within(0.02 * (1 + 1e-9)));
  expect(Array.from(keptX.subarray(0, kept))).toEqual(plainX);
  expect(Array.from(keptY.subarray(0, kept))).toEqual(plainY);
  return kept;
}

const withRange = <T extends { x: Float64Array }>(samples: fc.Arbitrary<T>) =>
  samples.chain((pairs) => fc.tuple(fc.constant(pairs), fc.integer({ min: 0, max: pairs.x.length }), fc.integer({ min: 0, max: pairs.x.length })));

describe('two-pass gate', () => {
  it('keeps exactly the pairs Math.hypot puts within the gate, in order', () => {
    fc.assert(
      fc.property(withRange(ellipseSamples), ([{ x, y }, a, b]) => {
        checkGate(ellipse, x, y, Math.min(a, b), Math.max(a, b));
      }),
      { numRuns: 300 },
    );
  });

  it('decides as Math.hypot within an ulp of the bounds, where u² + v² alone decides otherwise', () => {
    // The unit circle: u = x and v = y exactly. Pairs within a few ulps of radius 0.5 or 1.5, where about one in a
    // few hundred is on the other side of the bound for hypot than for u² + v².
    const unit: EllipseCalibration = { offsetX: 0, offsetY: 0, amplitudeX: 1, amplitudeY: 1, phaseErrorRad: 0 };
    const hugging = huggingTheGate(1000, 2000);
    fc.assert(
      fc.property(hugging, ({ x, y }) => {
        const kept = checkGate(unit, x, y, 0, x.length);
        expect(kept).toBeGreaterThan(0);
        expect(kept).toBeLessThan(x.length);
      }),
      { numRuns: 20 },
    );
  });
});
