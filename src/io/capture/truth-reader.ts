// A truth file (CSV with columns t in seconds and position_m in metres, such as `fringetally simulate` writes)
// read in one pass and interpolated at the times of another series, for comparing a measurement with it.
import { CaptureFormatError } from './errors.js';
import { openCapture } from './open-capture.js';
import type { Capture, CaptureBlock } from './types.js';

export interface TruthReader {
  readonly file: string;
  /**
   * Writes to `out[i]` the true position at `times[i]` (s), linearly interpolated between the truth's samples, or
   * NaN outside the truth's time span. Times must not decrease from one call to the next.
   */
  fill(times: ArrayLike<number>, out: Float64Array, length: number): Promise<void>;
  close(): Promise<void>;
}

/** Opens `path` as a truth file: it must have a `t` column and a `position_m` column. */
export async function openTruthFile(path: string): Promise<TruthReader> {
  const capture: Capture = await openCapture(path, { format: 'csv', xChannel: 'position_m', yChannel: 'position_m', timeColumn: 't' });
  const blocks = capture.blocks();
  // The reader reuses its block arrays, so the current block is copied; the sample before it is kept for interpolation.
  let times = new Float64Array(0);
  let positions = new Float64Array(0);
  let length = 0;
  let index = 0;
  let previousT = Number.NaN;
  let previousP = Number.NaN;
  let ended = false;
  let row = 0;

  async function load(): Promise<void> {
    const next = await blocks.next();
    if (next.done === true) {
      ended = true;
      return;
    }
    const block: CaptureBlock = next.value;
    if (times.length < block.length) {
      times = new Float64Array(block.length);
      positions = new Float64Array(block.length);
    }
    times.set(block.t!.subarray(0, block.length));
    positions.set(block.x.subarray(0, block.length));
    length = block.length;
    index = 0;
    for (let i = 0; i < length; i++) {
      const last = i === 0 ? previousT : times[i - 1]!;
      if (!(times[i]! > last) && !Number.isNaN(last)) {
        throw new CaptureFormatError({ file: path, line: null, byteOffset: null, expected: `increasing times in column t (sample ${row + i + 1} is at ${times[i]} s, after ${last} s)` });
      }
    }
    row += length;
  }

  return {
    file: path,
    async fill(query, out, n) {
      for (let i = 0; i < n; i++) {
        const q = query[i]!;
        for (;;) {
          if (index < length && times[index]! <= q) {
            previousT = times[index]!;
            previousP = positions[index]!;
            index++;
          } else if (index >= length && !ended) {
            await load();
          } else {
            break;
          }
        }
        if (previousT === q) out[i] = previousP;
        else if (index < length && !Number.isNaN(previousT)) {
          const fraction = (q - previousT) / (times[index]! - previousT);
          out[i] = previousP + fraction * (positions[index]! - previousP);
        } else out[i] = Number.NaN;
      }
    },
    close: () => capture.close(),
  };
}
