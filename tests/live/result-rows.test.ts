// Listen's rows sink: the rows of every position block go to the result writer during the call, and the session
// gets a job to wait for only when bytes went out (a failed write or a bad block: a job that fails).
import { describe, expect, it } from 'vitest';
import { PassThrough } from 'node:stream';
import { createResultWriter } from '../../src/io/results/index.js';
import type { LivePositions } from '../../src/io/live/index.js';
import type { AxisBlockSummary } from '../../src/stream/index.js';
import { resultRows } from '../../tools/live/result-rows.js';

/** A position block of `length` samples from `first` (invented values), as the chain hands it out. */
function positions(first: number, length: number, rateHz = 1000): LivePositions {
  const output = {
    positionM: Float64Array.from({ length }, (_, i) => 1e-7 * (first + i)),
    velocityMS: Float64Array.from({ length }, (_, i) => 0.01 * Math.sin(first + i)),
    level: Float32Array.from({ length }, () => 0.9),
    flags: new Uint8Array(length),
  };
  const summary = { firstSampleIndex: first, length, output } as unknown as AxisBlockSummary;
  return { kind: 'positions', rateHz, block: null!, summaries: [summary] };
}

async function opened() {
  const stdout = new PassThrough();
  const parts: Buffer[] = [];
  stdout.on('data', (part: Buffer) => parts.push(part));
  const writer = await createResultWriter('-', { format: 'csv', stdout });
  return { writer, text: () => Buffer.concat(parts).toString('utf8') };
}

describe('resultRows', () => {
  it('hands back a job only when bytes went out, and writes the rows write() gives', async () => {
    const own = await opened();
    const rows = resultRows(own.writer);
    let jobs = 0;
    for (let first = 0; first < 6000; first += 100) {
      const job = rows(positions(first, 100));
      if (job) {
        jobs++;
        await job();
      }
    }
    await own.writer.close();
    // About 370 kB of rows: a job for each 64 KiB the writer wrote, none for the blocks whose rows it only buffered.
    expect(jobs).toBeGreaterThanOrEqual(4);
    expect(jobs).toBeLessThanOrEqual(6);
    const reference = await opened();
    for (let first = 0; first < 6000; first += 100) {
      const { summaries, rateHz } = positions(first, 100);
      const { firstSampleIndex, length, output } = summaries[0]!;
      await reference.writer.write({ firstIndex: firstSampleIndex, length, rateHz, ...output });
    }
    await reference.writer.close();
    expect(own.text()).toBe(reference.text());
  });

  it('a block the writer refuses: a job that fails with its error, in its turn', async () => {
    const own = await opened();
    const rows = resultRows(own.writer);
    const job = rows(positions(0, 10, 0));
    expect(job).toBeTypeOf('function');
    await expect(job!()).rejects.toThrow('block.rateHz must be a positive finite number (got 0)');
  });
});
