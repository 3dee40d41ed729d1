// The block records the stream operators take and give: one record per block of samples, never per sample.

import { OptionError, type AlarmEvent, type SampleArray } from '../core/index.js';

/**
 * One axis' quadrature samples: `x[0..length)` and `y[0..length)`.
 * Producers may reuse the arrays after emission; every operator here reads them synchronously inside `next`
 * and keeps no reference, so reuse is safe.
 */
export interface AxisBlock {
  readonly x: SampleArray;
  readonly y: SampleArray;
  readonly length: number;
  /** Samples lost in transport just before this block (0 or absent: none). */
  readonly gapBefore?: number;
}

/**
 * A multi-channel block of interleaved int16 samples: `samples[s * channelCount + c]` is sample s of channel
 * c; channel 2k is x and 2k + 1 is y of axis k. The fields match the serial decoder's block, so its blocks
 * can be passed on as they are (add `gapBefore` from its gap records).
 */
export interface FrameBlock {
  readonly samples: Int16Array;
  /** 2..16; even without `axisOutputs`. */
  readonly channelCount: number;
  /**
   * Detector outputs of each axis in channel order (2, 3 or 4 each, summing to `channelCount`): a frame's channel
   * layout (wire format version 3). Absent: pairs, channel 2k is x and 2k + 1 is y of axis k.
   */
  readonly axisOutputs?: readonly number[];
  /** Samples per channel in this block. */
  readonly samplesPerFrame: number;
  /** Samples per channel lost in transport just before this block (0 or absent: none). */
  readonly gapBefore?: number;
}

/**
 * The signal chain's output for one block. The arrays are views of buffers owned by the operator's
 * subscription and are overwritten by the next block: read them inside `next`, copy what must outlive it.
 */
export interface PositionBlock {
  /** Absolute index of the block's first sample (samples since start, lost ones included). */
  readonly firstSampleIndex: number;
  readonly length: number;
  readonly positionM: Float64Array;
  readonly velocityMS: Float64Array;
  readonly level: Float32Array;
  /** `AlarmBit` flags per sample. */
  readonly flags: Uint8Array;
  /** Alarm state changes inside this block, in index order. */
  readonly events: readonly AlarmEvent[];
  /** Latched count-lost state after the block. */
  readonly countLost: boolean;
}

/** Corrected quadrature for one block: unit circle when the calibration fits. Views reused as for `PositionBlock`. */
export interface CorrectedBlock {
  readonly u: Float64Array;
  readonly v: Float64Array;
  readonly length: number;
}

/** Checks a block's shape; a malformed block is the producer's mistake and ends the stream with this error. */
export function checkAxisBlock(block: AxisBlock): void {
  const { length } = block;
  if (!Number.isInteger(length) || length < 0 || length > block.x.length || length > block.y.length) {
    throw new OptionError('block.length', `an integer in 0..min(x.length, y.length) = ${Math.min(block.x.length, block.y.length)}`, length);
  }
  checkGap(block.gapBefore);
}

export function checkFrameBlock(block: FrameBlock): void {
  const { channelCount, samplesPerFrame, axisOutputs } = block;
  if (axisOutputs === undefined) {
    if (!Number.isInteger(channelCount) || channelCount < 2 || channelCount > 16 || channelCount % 2 !== 0) {
      throw new OptionError('block.channelCount', 'an even integer in 2..16', channelCount);
    }
  } else {
    let sum = 0;
    // Indexed: a live link's blocks all carry a layout, and for-of left an iterator per block.
    for (let a = 0; a < axisOutputs.length; a++) {
      const outputs = axisOutputs[a]!;
      if (!(Number.isInteger(outputs) && outputs >= 2 && outputs <= 4)) throw new OptionError('block.axisOutputs', 'outputs per axis, each an integer in 2..4', axisOutputs);
      sum += outputs;
    }
    if (sum !== channelCount || channelCount > 16) throw new OptionError('block.channelCount', `the sum of axisOutputs (${sum}), at most 16`, channelCount);
  }
  if (!Number.isInteger(samplesPerFrame) || samplesPerFrame < 0 || samplesPerFrame * channelCount > block.samples.length) {
    throw new OptionError('block.samplesPerFrame', `an integer in 0..samples.length / channelCount = ${Math.floor(block.samples.length / channelCount)}`, samplesPerFrame);
  }
  checkGap(block.gapBefore);
}

function checkGap(gapBefore: number | undefined): void {
  if (gapBefore !== undefined && !(Number.isInteger(gapBefore) && gapBefore >= 0)) {
    throw new OptionError('block.gapBefore', 'a non-negative integer', gapBefore);
  }
}

/** Float64 scratch that grows once to the largest block seen and hands out views of the current length. */
export interface Scratch {
  view(length: number): Float64Array;
}

export function createScratch(initialCapacity: number): Scratch {
  let buffer = new Float64Array(initialCapacity);
  let current = buffer;
  return {
    view(length: number) {
      if (length > buffer.length) buffer = new Float64Array(length);
      // A view is made only when the block length changes, so steady streams allocate nothing.
      if (current.buffer !== buffer.buffer || current.length !== length) current = buffer.subarray(0, length);
      return current;
    },
  };
}
