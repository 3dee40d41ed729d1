// The report's decimated series (createEnvelope): a block whose extremes are given (as the WebAssembly block
// summary finds them) gives the same series as the compare loop over its values, for any block sizes, bucket
// strides, times and NaN values. The check value is the loop itself; the values are random.
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import '../support/property-seed.js';
import { createEnvelope } from '../../tools/capture-analyses.js';
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
});
