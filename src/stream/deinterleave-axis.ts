// Operator: one axis' x and y out of interleaved multi-channel frames (channel 2k is x, 2k + 1 is y of axis k, or
// the axis' two outputs in a frame with a channel layout).

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
        const { channelCount, samplesPerFrame, samples, axisOutputs } = frame;
        let first = 2 * axis;
        if (axisOutputs !== undefined) {
          if (axisOutputs[axis] !== undefined && axisOutputs[axis] !== 2) {
            throw new RangeError(`axis ${axis} has ${axisOutputs[axis]} detector outputs, not a pair: give createAxes an axis with their channels`);
          }
          first = axisOutputs.slice(0, axis).reduce((sum, outputs) => sum + outputs, 0);
        }
        if (first + 1 >= channelCount) {
          throw new RangeError(`axis ${axis} needs channels ${first} and ${first + 1} (frame has ${channelCount})`);
        }
        if (x.length < samplesPerFrame) {
          x = new Int16Array(samplesPerFrame);
          y = new Int16Array(samplesPerFrame);
        }
        let at = first;
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
