// Parts of a capture kept in memory as a pass over the whole of it goes by, for a later step that would otherwise
// open and read each part again (calibrate's analyses after the fit's pass: 256 parts, each a few file-system round
// trips to open, then a read).
import { OptionError } from '../../core/options.js';
import type { BlockSamples, CaptureBlock, SampleEncoding } from './types.js';

/** Parts of a capture kept in memory as a pass over the whole of it goes by (keepCaptureParts). */
export interface KeptParts {
  /** Copies x and y of the samples of `block` that fall in a part. Blocks come in file order, each once a pass. */
  add(block: CaptureBlock<BlockSamples>): void;
  /** Whether every sample of every part went by since the last reset. */
  readonly complete: boolean;
  /**
   * The parts, each as the blocks `openCaptureParts` delivers for it with this `blockSize` (x and y only;
   * `channels` is [x, y], `t` null). One block object and its arrays are reused: copy what you keep.
   */
  parts(): Iterable<{ blocks(): Iterable<CaptureBlock> }>;
  /** Forgets what was kept, for a new pass. */
  reset(): void;
}

/**
 * Keeps `parts` ([startSample, sampleCount], in file order, not overlapping) of a capture whose samples are stored
 * as `encoding`: in Float32Array where that is exact (int16, int24: 24 bits fit a float32's significand, float32),
 * else in Float64Array.
 */
export function keepCaptureParts(parts: readonly (readonly [startSample: number, sampleCount: number])[], blockSize: number, encoding: SampleEncoding): KeptParts {
  if (!(Number.isInteger(blockSize) && blockSize >= 1)) throw new OptionError('blockSize', 'an integer from 1', blockSize);
  const offsets: number[] = [];
  let total = 0;
  let end = 0;
  parts.forEach(([start, count], k) => {
    if (!(Number.isInteger(start) && start >= end && Number.isInteger(count) && count >= 1)) {
      throw new OptionError(`parts[${k}]`, `a part starting at an integer from ${end} (after the part before it) with at least one sample`, [start, count]);
    }
    offsets.push(total);
    total += count;
    end = start + count;
  });
  const exact = encoding === 'int16' || encoding === 'int24' || encoding === 'float32';
  const keptX = exact ? new Float32Array(total) : new Float64Array(total);
  const keptY = exact ? new Float32Array(total) : new Float64Array(total);
  let seen = 0;
  // The first part not yet wholly gone by.
  let cursor = 0;

  function add(block: CaptureBlock<BlockSamples>): void {
    const from = block.firstIndex, to = from + block.length;
    while (cursor < parts.length && parts[cursor]![0] + parts[cursor]![1] <= from) cursor++;
    for (let k = cursor; k < parts.length && parts[k]![0] < to; k++) {
      const [start, count] = parts[k]!;
      const a = Math.max(start, from), b = Math.min(start + count, to);
      if (a >= b) continue;
      const at = offsets[k]! + a - start;
      keptX.set(block.x.subarray(a - from, b - from), at);
      keptY.set(block.y.subarray(a - from, b - from), at);
      seen += b - a;
    }
  }

  const x = new Float64Array(blockSize);
  const y = new Float64Array(blockSize);
  const block = { x, y, channels: [x, y] as readonly Float64Array[], t: null, length: 0, firstIndex: 0 };

  function* blocksOf(k: number): Generator<CaptureBlock> {
    const [start, count] = parts[k]!;
    for (let done = 0; done < count; done += blockSize) {
      const n = Math.min(blockSize, count - done);
      const at = offsets[k]! + done;
      block.x = n === blockSize ? x : x.subarray(0, n);
      block.y = n === blockSize ? y : y.subarray(0, n);
      block.x.set(keptX.subarray(at, at + n));
      block.y.set(keptY.subarray(at, at + n));
      block.channels = [block.x, block.y];
      block.length = n;
      block.firstIndex = start + done;
      yield block;
    }
  }

  return {
    add,
    get complete() {
      return seen === total;
    },
    *parts() {
      for (let k = 0; k < parts.length; k++) yield { blocks: () => blocksOf(k) };
    },
    reset() {
      seen = 0;
      cursor = 0;
    },
  };
}
