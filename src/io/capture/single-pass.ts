// The one-pass Capture both readers hand out: a reader fills its reused buffers, this turns that into blocks.
import type { FileHandle } from 'node:fs/promises';
import type { BlockSamples, Capture, CaptureBlock, CaptureInfo } from './types.js';

export interface BlockBuffers<Samples extends BlockSamples = Float64Array> {
  readonly x: Samples;
  readonly y: Samples;
  /** Outputs 3 and 4 when the capture was opened with them. */
  readonly extra: readonly Samples[];
  /** Times in seconds, or null when the file has no time column. */
  readonly t: Float64Array | null;
}

/**
 * A Capture over `fill`, which writes up to `buffers.x.length` samples into the buffers and resolves with the
 * count (0 at the end; it rejects at the first bad place, after the good samples before it were delivered).
 * The file closes when the pass ends, early or not (`release`: by default the handle closes). `firstIndex`: the
 * absolute index of the first sample filled.
 */
export function singlePassCapture<Samples extends BlockSamples>(
  info: CaptureInfo,
  handle: FileHandle,
  buffers: BlockBuffers<Samples>,
  fill: () => Promise<number>,
  firstIndex = 0,
  release: () => Promise<void> = () => handle.close(),
): Capture<Samples> {
  const blockSize = buffers.x.length;
  const block: { -readonly [K in keyof CaptureBlock<Samples>]: CaptureBlock<Samples>[K] } = {
    x: buffers.x,
    y: buffers.y,
    channels: [buffers.x, buffers.y, ...buffers.extra],
    t: buffers.t,
    length: 0,
    firstIndex: 0,
  };
  let samplesDelivered = firstIndex;
  let closed = false;
  let started = false;

  async function close(): Promise<void> {
    if (closed) return;
    closed = true;
    await release();
  }

  async function* blocks(): AsyncGenerator<CaptureBlock<Samples>> {
    try {
      for (;;) {
        const count = await fill();
        if (count === 0) return;
        if (count < blockSize) {
          // Only the last block is shorter: views of the reused buffers.
          block.x = buffers.x.subarray(0, count) as Samples;
          block.y = buffers.y.subarray(0, count) as Samples;
          block.t = buffers.t === null ? null : buffers.t.subarray(0, count);
          block.channels = [block.x, block.y, ...buffers.extra.map((channel) => channel.subarray(0, count) as Samples)];
        }
        block.length = count;
        block.firstIndex = samplesDelivered;
        samplesDelivered += count;
        yield block;
      }
    } finally {
      await close();
    }
  }

  const capture: Capture<Samples> = {
    info,
    blocks() {
      if (started) throw new Error(`${info.file}: blocks() can be called once per openCapture`);
      started = true;
      return blocks();
    },
    [Symbol.asyncIterator]() {
      return capture.blocks();
    },
    close,
  };
  return capture;
}
