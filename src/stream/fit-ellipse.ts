// Operator: Heydemann (1981) ellipse fit over a sliding count of samples, one fit result per `everySamples`.

import type { OperatorFunction } from 'rxjs';
import { blockOperator } from './block-operator.js';
import { createEllipseAccumulator, integerInRange, type EllipseFitOptions, type EllipseFitResult } from '../core/index.js';
import { checkAxisBlock, type AxisBlock } from './blocks.js';

export interface FitEllipseOptions extends EllipseFitOptions {
  /** Samples per fit: a result is emitted each time this many samples have been added since the last. Integer 6..2^40. */
  readonly everySamples: number;
}

/**
 * Blocks → fit results. Fits cover exactly `everySamples` samples whatever the block split (a block that
 * crosses the boundary is split there); gaps do not matter to the fit and are ignored.
 */
export function fitEllipse(options: FitEllipseOptions): OperatorFunction<AxisBlock, EllipseFitResult> {
  const everySamples = integerInRange('everySamples', options.everySamples, 6, 2 ** 40);
  createEllipseAccumulator(options);
  return blockOperator(() => {
    const accumulator = createEllipseAccumulator(options);
    return {
      next(block, out) {
        checkAxisBlock(block);
        let done = 0;
        while (done < block.length) {
          const take = Math.min(block.length - done, everySamples - accumulator.samples - accumulator.skippedNonFinite);
          const x = done === 0 && take === block.length ? block.x : block.x.subarray(done, done + take);
          const y = done === 0 && take === block.length ? block.y : block.y.subarray(done, done + take);
          accumulator.add(x, y, take);
          done += take;
          if (accumulator.samples + accumulator.skippedNonFinite === everySamples) {
            out.push(accumulator.solve());
            accumulator.reset();
          }
        }
      },
      teardown() {
        accumulator.reset();
      },
    };
  });
}
