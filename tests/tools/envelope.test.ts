// The report's decimated series (createEnvelope): a block whose extremes are given (as the WebAssembly block
// summary finds them) gives the same series as the compare loop over its values, for any block sizes, bucket
// strides, times and NaN values; a run of known length started at its final stride gives the series of one that
// doubles its stride from 1. The check values are the loop and the doubling themselves; the values are random.
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import '../support/property-seed.js';
import { createEnvelope, finalStride } from '../../tools/capture-analyses.js';
import { createJsAxisKernels } from '../../src/accel/axis-kernels.js';

describe('createEnvelope', () => {
  it('gives the same series from block extremes as from the values', () => {
    const value = fc.oneof({ weight: 8, arbitrary: fc.double({ min: -1e3, max: 1e3, noNaN: true }) }, { weight: 1, arbitrary: fc.constant(NaN) });
    fc.assert(
      fc.property(
        fc.integer({ min: 2, max: 12 }),
        fc.array(fc.array(value, { minLength: 1, maxLength: 40 }), { minLength: 1, maxLength: 40 }),
        fc.boolean(),
        (maxPoints, blocks, withTimes) => {
          const looped = createEnvelope(maxPoints);
          const summarised = createEnvelope(maxPoints);
          const kernels = createJsAxisKernels([2], 64);
          const extremes = { positionMinM: 0, positionMaxM: 0, velocityMinMS: 0, velocityMaxMS: 0, levelMin: 0, flagsSeen: 0 };
          let first = 0;
          for (const block of blocks) {
            const values = Float64Array.from(block);
            const n = values.length;
            const times = withTimes ? values.map((_, i) => 0.5 * (first + i) + 0.25) : null;
            kernels.regions[0]!.positionM.set(values);
            kernels.summarise(0, n, extremes);
            looped.add(values, n, times, first, 0.5);
            summarised.add(values, n, times, first, 0.5, extremes.positionMinM, extremes.positionMaxM);
            first += n;
          }
          expect(summarised.series()).toEqual(looped.series());
        },
      ),
    );
  });

  it('started at the stride a run of known length ends with, gives the series of one doubling from 1', () => {
    // Zeros of both signs aside (halving takes Math.min, the loop the first of equal values).
    const value = fc.oneof({ weight: 8, arbitrary: fc.double({ min: -1e3, max: 1e3, noNaN: true }).map((v) => v + 0) }, { weight: 1, arbitrary: fc.constant(NaN) });
    fc.assert(
      fc.property(
        fc.integer({ min: 1, max: 8 }).map((half) => 2 * half),
        fc.array(fc.array(value, { minLength: 1, maxLength: 30 }), { minLength: 1, maxLength: 30 }),
        (maxPoints, blocks) => {
          const total = blocks.reduce((sum, block) => sum + block.length, 0);
          const doubling = createEnvelope(maxPoints);
          const known = createEnvelope(maxPoints, total);
          let first = 0;
          for (const block of blocks) {
            const values = Float64Array.from(block);
            doubling.add(values, values.length, null, first, 1e-3);
            known.add(values, values.length, null, first, 1e-3);
            first += values.length;
          }
          expect(known.series()).toEqual(doubling.series());
        },
      ),
    );
    expect(finalStride(2000, 3e7)).toBe(16384); // 3e7 / 16384 = 1831 buckets, 3e7 / 8192 = 3662
    expect(finalStride(2000, null)).toBe(1);
    expect(finalStride(2001, 3e7)).toBe(1);
  });
});
