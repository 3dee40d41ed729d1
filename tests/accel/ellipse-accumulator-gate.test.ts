// The WebAssembly accumulator's gated add (addWithin, the two-pass fit's second pass with the gate in the kernel)
// against its plain formulation: keepWithin (src/core/fit/two-pass.ts) over each 4096 pairs, then the core
// accumulator's add of the pairs it kept. The same sums, grid, shift, counts and pairs near the bounds, bit for bit,
// for any block lengths, also for pairs within an ulp of the bounds (Math.hypot's decisions) and non-finite ones.
// Samples are invented: points of an invented ellipse at drawn radii, glitches and non-finite values.
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { createCorrection, createEllipseAccumulator, type EllipseAccumulator, type EllipseCalibration } from '../../src/core/index.js';
import { keepWithin } from '../../src/core/fit/two-pass.js';
import { createWasmEllipseAccumulator } from '../../src/accel/index.js';
import '../support/property-seed.js';
import { ellipseRuns, huggingTheGate, expectSameState } from '../support/fit-accumulators.js';

const ellipse: EllipseCalibration = { offsetX: 37, offsetY: -21, amplitudeX: 9000, amplitudeY: 7600, phaseErrorRad: 0.3 };
const CHUNK = 4096;

/** Runs of pairs of the invented ellipse at drawn radii (on the gate's bounds, within an ulp of them, anywhere), with glitches. */
const ellipseSamples = ellipseRuns(ellipse, {
  radius: fc.oneof(
    fc.constantFrom(0, 0.5, 1.5, 0.5 * (1 + 2 ** -52), 0.5 * (1 - 2 ** -52), 1.5 * (1 + 2 ** -52), 1.5 * (1 - 2 ** -52), 0.48, 0.52, 1.48, 1.52),
    fc.double({ min: 0, max: 3, noNaN: true }),
  ),
  // No 1e300: the grid would zoom out a thousand times (each over its 16384 cells) in every add of it.
  glitches: [Number.NaN, Infinity, -Infinity, 3e5, -1e9],
  maxRepeat: 2000,
  maxRuns: 12,
});

const hugging = huggingTheGate(1, 3000);

/** The plain second pass: keepWithin over each CHUNK pairs, then add of those kept. */
function plainWithin(accumulator: EllipseAccumulator, x: Float64Array, y: Float64Array, coefficients: Float64Array, near: Float64Array): void {
  const keptX = new Float64Array(CHUNK), keptY = new Float64Array(CHUNK);
  for (let start = 0; start < x.length; start += CHUNK) {
    const kept = keepWithin(x, y, start, Math.min(x.length, start + CHUNK), coefficients, 0.5, 1.5, keptX, keptY, 0.02, near);
    accumulator.add(keptX, keptY, kept);
  }
}

function checkSequence(calibration: EllipseCalibration, blocks: readonly { x: Float64Array; y: Float64Array; gated: boolean }[]): void {
  const { coefficients } = createCorrection({ calibration });
  const fast = createWasmEllipseAccumulator()!;
  const core = createEllipseAccumulator();
  const fastNear = new Float64Array([5]);
  const coreNear = new Float64Array([5]);
  for (const { x, y, gated } of blocks) {
    if (gated) {
      fast.addWithin!(x, y, x.length, coefficients, 0.5, 1.5, 0.02, fastNear);
      plainWithin(core, x, y, coefficients, coreNear);
    } else {
      fast.add(x, y, x.length);
      core.add(x, y, x.length);
    }
    expectSameState(fast, core);
    expect(fastNear[0]).toBe(coreNear[0]);
  }
}

describe('WebAssembly ellipse accumulator, gated add', () => {
  it('keeps the pairs, sums, grid and near count of keepWithin then the core add, for any blocks', () => {
    fc.assert(
      fc.property(fc.array(fc.record({ samples: ellipseSamples, gated: fc.boolean() }), { minLength: 1, maxLength: 5 }), (blocks) => {
        checkSequence(
          ellipse,
          blocks.map(({ samples, gated }) => ({ ...samples, gated })),
        );
      }),
      { numRuns: 100 },
    );
  });

  it('decides as Math.hypot within an ulp of the bounds', () => {
    const unit: EllipseCalibration = { offsetX: 0, offsetY: 0, amplitudeX: 1, amplitudeY: 1, phaseErrorRad: 0 };
    fc.assert(
      fc.property(fc.array(hugging, { minLength: 1, maxLength: 3 }), (blocks) => {
        checkSequence(
          unit,
          blocks.map((samples) => ({ ...samples, gated: true })),
        );
      }),
      { numRuns: 20 },
    );
  });
});
