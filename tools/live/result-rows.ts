// Listen's result rows: axis 0's positions of every block go to the result writer, which formats them during the
// call; the arrays are reused for the next block right after, so nothing is copied and nothing is allocated per
// block. The writing itself (when the writer's buffer is full) is the sink's job, awaited in turn; a block whose
// rows only went into the buffer hands back no job, so the session has nothing to wait for.

import type { ResultBlock, ResultFileWriter } from '../../src/io/results/index.js';
import type { LivePositions } from '../../src/io/live/index.js';
import type { SinkJob } from './live-session.js';

/** The `positions` handler of a live sink that writes axis 0's rows to `writer`. */
export function resultRows(writer: ResultFileWriter): (positions: LivePositions) => SinkJob | void {
  const block: { -readonly [K in keyof ResultBlock]: ResultBlock[K] } = {
    firstIndex: 0,
    length: 0,
    rateHz: 1,
    positionM: new Float64Array(0),
    velocityMS: new Float64Array(0),
    level: new Float32Array(0),
    flags: new Uint8Array(0),
    // Always there (undefined for a pair), so the record keeps one shape.
    power: undefined,
  };
  return ({ summaries, rateHz }) => {
    const { firstSampleIndex, length, output } = summaries[0]!;
    block.firstIndex = firstSampleIndex;
    block.length = length;
    block.rateHz = rateHz;
    block.positionM = output.positionM;
    block.velocityMS = output.velocityMS;
    block.level = output.level;
    block.flags = output.flags;
    block.power = output.power;
    let written: Promise<void> | undefined;
    try {
      written = writer.add(block);
    } catch (error) {
      // A bad block or a failed writer: the job hands the error to the session in its turn, as a write's would.
      written = Promise.reject(error);
    }
    if (written === undefined) return;
    // Marked as handled here: the session may stop before it runs the job; the job still sees a failure.
    written.catch(() => undefined);
    const job = written;
    return () => job;
  };
}
