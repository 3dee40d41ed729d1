// Operator: one axis' x and y out of interleaved multi-channel frames (channel 2k is x, 2k + 1 is y of axis k).

import type { OperatorFunction } from 'rxjs';
import { blockOperator } from './block-operator.js';
import { integerInRange } from '../core/index.js';
import { checkFrameBlock, type AxisBlock, type FrameBlock } from './blocks.js';

export interface DeinterleaveAxisOptions {
  /** Axis number k (channels 2k and 2k + 1). Integer 0..7. */
  readonly axis: number;
}

/**
 * Frames → the axis' `AxisBlock`s. Copies the samples into Int16Array buffers owned by the subscription,
 * reused for the next frame; a frame without this axis ends the stream with an error.
 */
export function deinterleaveAxis(options: DeinterleaveAxisOptions): OperatorFunction<FrameBlock, AxisBlock> {
  const axis = integerInRange('axis', options.axis, 0, 7);
  return blockOperator(() => {
    let x = new Int16Array(0);
    let y = new Int16Array(0);
    return {
      next(frame, out) {
        checkFrameBlock(frame);
        const { channelCount, samplesPerFrame, samples } = frame;
        if (2 * axis + 1 >= channelCount) {
          throw new RangeError(`axis ${axis} needs channels ${2 * axis} and ${2 * axis + 1} (frame has ${channelCount})`);
        }
        if (x.length < samplesPerFrame) {
          x = new Int16Array(samplesPerFrame);
          y = new Int16Array(samplesPerFrame);
        }
        let at = 2 * axis;
        for (let s = 0; s < samplesPerFrame; s++) {
          x[s] = samples[at]!;
          y[s] = samples[at + 1]!;
          at += channelCount;
        }
        out.push({ x, y, length: samplesPerFrame, gapBefore: frame.gapBefore ?? 0 });
      },
      teardown() {
        x = new Int16Array(0);
        y = new Int16Array(0);
      },
    };
  });
}
