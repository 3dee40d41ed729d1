// The sample block both decoders hand out, the input-gap record, and the per-axis split the pipeline needs.
import type { SampleArray } from '../../core/index.js';
import type { FrameBlock } from '../../stream/index.js';

/**
 * The stream layer's `FrameBlock` (interleaved int16 samples, channel 2k is x and 2k + 1 is y of axis k, or with a
 * channel layout the axes' detector outputs one after the other) as the decoders hand it out, with what the link
 * tells about it: sequence, index, rate, device time and edges. One concept, one type: a decoder's block goes into
 * `deinterleaveAxis` or `createAxes` as it is.
 * The object and its `samples` view are reused: read them inside the callback, copy what must outlive it.
 */
export interface SampleBlock extends FrameBlock {
  /**
   * Version 3 frames: the packed channel layout (detector outputs of axis k in bits 4k..4k+3, see
   * `axisOutputsOf`); 0 when the frame has none (pairs).
   */
  readonly channelLayout: number;
  /** Wire frames: the frame's u16 sequence counter. Text lines: the block counter (mod 65536). */
  readonly sequence: number;
  /**
   * Absolute index of the block's first sample, counting lost samples as every index in the library does: samples
   * delivered plus samples a sequence gap lost (a resync of unknown length counts as one), since start or reset.
   */
  readonly sampleIndex: number;
  /** Sample rate sent with the frame in Hz, or NaN when absent. */
  readonly sampleRateHz: number;
  /** Device time of the first sample in µs (u32, wraps), or NaN when absent. */
  readonly timestampUs: number;
  /** Version 2 frames: the device's count of the block's first sample (u32, wraps), or NaN when absent. */
  readonly sampleCounter: number;
  /** Edges of the digital inputs timed in this block (version 2 frames; 0 otherwise). */
  readonly edgeCount: number;
  /**
   * Edge times in sample periods from the block's first sample, in (−1, samplesPerFrame − 1]: the edge lies
   * between sample ⌈t⌉ − 1 and sample ⌈t⌉ (−1 meaning the previous block's last sample). First `edgeCount` used.
   */
  readonly edgeTime: Float64Array;
  /** Input line of each edge: 0 trigger, 1 reference mark, 2..7 further trigger inputs. */
  readonly edgeLine: Uint8Array;
  /** 1 for a rising edge, 0 for a falling one. */
  readonly edgeRising: Uint8Array;
}

/** A block with no edges: the typed arrays the decoders hand out when a block carries none. */
export const NO_EDGES = Object.freeze({
  edgeCount: 0,
  edgeTime: new Float64Array(0),
  edgeLine: new Uint8Array(0),
  edgeRising: new Uint8Array(0),
});

/** The channel layout of a block without one: pairs. */
export const NO_LAYOUT = 0;

/**
 * Samples lost in transport, found from a jump of the sequence counter (or of the sample counter, when the
 * frames carry one). See docs/wire-format.md, "Sequence counter and gaps".
 */
export interface InputGap {
  /** Absolute index of the first sample after the gap (same count as `SampleBlock.sampleIndex`). */
  readonly sampleIndex: number;
  /**
   * `loss`: the counter moved forward by less than half its range, so the missing frames are counted.
   * `resync`: it moved backwards or by half its range or more (a device that restarted or rewound its counter):
   * samples may be missing, how many is unknown.
   */
  readonly kind: 'loss' | 'resync';
  /** Frames missing: (received − expected) mod 65536; NaN for a resync. */
  readonly lostFrames: number;
  /**
   * Samples missing: the sample counter's jump when the frames carry one, else lostFrames × samplesPerFrame of
   * the frame after the gap; NaN for a resync.
   */
  readonly lostSamples: number;
  readonly expectedSequence: number;
  readonly receivedSequence: number;
}

/** Any numeric array the pipeline takes for x and y blocks (the core's own type). */
export type { SampleArray };

/**
 * Copies axis `axis` of a block into `x` (channel 2·axis) and `y` (channel 2·axis + 1) from index 0.
 * Returns the samples written (`block.samplesPerFrame`). Throws a RangeError for an axis the block lacks or
 * arrays too short for the block, since either is a wiring mistake of the caller, not bad input.
 */
export function splitAxis(block: SampleBlock, axis: number, x: SampleArray, y: SampleArray): number {
  const axisCount = block.channelCount >> 1;
  if (!Number.isInteger(axis) || axis < 0 || axis >= axisCount) {
    throw new RangeError(`axis must be an integer in 0..${axisCount - 1} (got ${axis})`);
  }
  const n = block.samplesPerFrame;
  if (x.length < n || y.length < n) {
    throw new RangeError(`x and y must hold samplesPerFrame = ${n} values (got ${x.length} and ${y.length})`);
  }
  const stride = block.channelCount;
  const samples = block.samples;
  let at = 2 * axis;
  for (let s = 0; s < n; s++) {
    x[s] = samples[at]!;
    y[s] = samples[at + 1]!;
    at += stride;
  }
  return n;
}
