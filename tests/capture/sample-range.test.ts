// startSample / sampleCount of openCapture: a WAV capture read from any frame for any count delivers exactly
// those frames of a whole read, with their absolute indices; CSV refuses them. The samples are invented.
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { writeFileSync } from 'node:fs';
import { createCaptureWriter, keepCaptureParts, openCapture, openCaptureParts } from '../../src/io/capture/index.js';
import { collect, makeTempDir } from './helpers.js';
import '../support/property-seed.js';

const dir = makeTempDir();
afterAll(() => dir.remove());
const N = 10_000;
let wav = '';
let three = '';
let whole: Awaited<ReturnType<typeof collect>>;

beforeAll(async () => {
  wav = dir.file('range.wav');
  const x = Array.from({ length: N }, (_, i) => Math.round(20000 * Math.cos(i * 0.013)));
  const y = Array.from({ length: N }, (_, i) => Math.round(15000 * Math.sin(i * 0.013 + 0.1)));
  const writer = await createCaptureWriter(wav, { format: 'wav', rateHz: 1000, encoding: 'int16' });
  await writer.write(x, y, N);
  await writer.close();
  whole = await collect(wav);
  three = dir.file('three.wav');
  const outputs = await createCaptureWriter(three, { format: 'wav', rateHz: 1000, encoding: 'int16', channelCount: 3 });
  await outputs.writeChannels([x, y, x.map((v) => -v)], N);
  await outputs.close();
});

describe('reading part of a capture', () => {
  it('delivers the frames [startSample, startSample + sampleCount) of a whole read, with absolute indices, for any block size', async () => {
    await fc.assert(
      fc.asyncProperty(
        fc.integer({ min: 0, max: N + 10 }),
        fc.option(fc.integer({ min: 0, max: N + 10 }), { nil: undefined }),
        fc.integer({ min: 1, max: 5000 }),
        fc.integer({ min: 4, max: 70_000 }),
        async (startSample, sampleCount, blockSize, readChunkBytes) => {
          const capture = await openCapture(wav, { startSample, sampleCount, blockSize, readChunkBytes });
          const x: number[] = [], y: number[] = [];
          let next = Math.min(startSample, N);
          for await (const block of capture.blocks()) {
            expect(block.firstIndex).toBe(next);
            next += block.length;
            x.push(...block.x);
            y.push(...block.y);
          }
          const end = sampleCount === undefined ? N : Math.min(N, startSample + sampleCount);
          expect(x).toEqual(whole.x.slice(startSample, end));
          expect(y).toEqual(whole.y.slice(startSample, end));
          expect(capture.info.totalSamples).toBe(N); // the file's, not the part's
        },
      ),
      { numRuns: 60 },
    );
  });

  it('delivers every output of a part of a three-output capture', async () => {
    const part = await collect(three, { channels: [1, 2, 3], startSample: 100, sampleCount: 50 });
    expect(part.x).toEqual(whole.x.slice(100, 150));
    const capture = await openCapture(three, { channels: [1, 2, 3], startSample: 9990 });
    const third: number[] = [];
    for await (const block of capture.blocks()) third.push(...block.channels[2]!);
    expect(third).toEqual(whole.x.slice(9990).map((v) => -v));
  });

  it('refuses a part of a CSV capture, and counts that are not whole numbers', async () => {
    const csv = dir.file('range.csv');
    writeFileSync(csv, '# rate_hz: 10\nx,y\n1,2\n3,4\n');
    await expect(openCapture(csv, { startSample: 1 })).rejects.toThrow(/startSample must be left out: .* is CSV, which is read from the start/);
    await expect(openCapture(csv, { sampleCount: 1 })).rejects.toThrow(/sampleCount must be left out/);
    expect((await collect(csv, { startSample: 0 })).x).toEqual([1, 3]);
    await expect(openCapture(wav, { startSample: -1 })).rejects.toThrow(/startSample must be an integer/);
    await expect(openCapture(wav, { sampleCount: 1.5 })).rejects.toThrow(/sampleCount must be an integer/);
  });

  it('reads parts one after another (each opened while the one before is read) as each read alone', async () => {
    await fc.assert(
      fc.asyncProperty(
        fc.array(fc.tuple(fc.integer({ min: 0, max: N - 1 }), fc.integer({ min: 1, max: 3000 })), { minLength: 1, maxLength: 6 }),
        fc.integer({ min: 1, max: 4096 }),
        async (parts, blockSize) => {
          let k = 0;
          for await (const part of openCaptureParts(wav, { blockSize, readChunkBytes: 1 << 12 }, parts)) {
            const [startSample, sampleCount] = parts[k++]!;
            const x: number[] = [];
            for await (const block of part.blocks()) x.push(...block.x);
            expect(x).toEqual(whole.x.slice(startSample, Math.min(N, startSample + sampleCount)));
          }
          expect(k).toBe(parts.length);
        },
      ),
      { numRuns: 30 },
    );
  });

  it('throws a part\'s opening failure where the part is taken, and ends early when the loop does', async () => {
    const taken: number[] = [];
    const reading = (async () => {
      for await (const part of openCaptureParts(dir.file('none.wav'), {}, [[0, 10], [10, 10]])) taken.push(part.info.totalSamples ?? -1);
    })();
    await expect(reading).rejects.toThrow(/none\.wav: cannot open the capture \(no such file\)/);
    expect(taken).toEqual([]);
    // Leaving after the first of three parts ends the loop there, with no error from the second, opened meanwhile
    // (that it is closed is not observable here: the generator's finally does it).
    let parts = 0;
    for await (const part of openCaptureParts(wav, { blockSize: 100 }, [[0, 10], [5, 10], [20, 10]])) {
      for await (const block of part.blocks()) expect(block.length).toBe(10);
      parts++;
      break;
    }
    expect(parts).toBe(1);
  });

  it('keeps parts from a whole pass as openCaptureParts reads them, for any read block size and parts', async () => {
    await fc.assert(
      fc.asyncProperty(
        // Sorted, not overlapping: gaps and lengths.
        fc.array(fc.tuple(fc.integer({ min: 0, max: 1500 }), fc.integer({ min: 1, max: 1500 })), { minLength: 1, maxLength: 6 }),
        fc.integer({ min: 1, max: 5000 }),
        fc.integer({ min: 1, max: 4096 }),
        async (spans, passBlockSize, blockSize) => {
          const parts: Array<readonly [number, number]> = [];
          let at = 0;
          for (const [gap, count] of spans) {
            if (at + gap >= N) break;
            parts.push([at + gap, Math.min(count, N - at - gap)]);
            at += gap + count;
          }
          fc.pre(parts.length > 0);
          const kept = keepCaptureParts(parts, blockSize, 'int16');
          for await (const block of (await openCapture(wav, { blockSize: passBlockSize })).blocks()) kept.add(block);
          expect(kept.complete).toBe(true);
          const read: unknown[] = [];
          for await (const part of openCaptureParts(wav, { blockSize }, parts)) {
            for await (const block of part.blocks()) read.push({ x: [...block.x], y: [...block.y], length: block.length, firstIndex: block.firstIndex });
          }
          const fromMemory: unknown[] = [];
          for (const part of kept.parts()) {
            for (const block of part.blocks()) {
              expect(block.channels).toEqual([block.x, block.y]);
              fromMemory.push({ x: [...block.x], y: [...block.y], length: block.length, firstIndex: block.firstIndex });
            }
          }
          expect(fromMemory).toEqual(read);
        },
      ),
      { numRuns: 30 },
    );
  });

  it('keeps parts: complete only after every part went by, again after a reset; exact for decimal text', async () => {
    const kept = keepCaptureParts([[100, 50], [9000, 1000]], 4096, 'int16');
    const pass = async (stopAt: number) => {
      kept.reset();
      for await (const block of (await openCapture(wav, { blockSize: 1000 })).blocks()) {
        if (block.firstIndex >= stopAt) break;
        kept.add(block);
      }
    };
    await pass(9000);
    expect(kept.complete).toBe(false);
    await pass(N);
    expect(kept.complete).toBe(true);
    await pass(5000);
    expect(kept.complete).toBe(false);
    // Decimal text is kept in doubles: 0.1 is not a float32.
    const csv = dir.file('decimal.csv');
    writeFileSync(csv, '# rate_hz: 10\nx,y\n0.1,-0.3\n0.7,1e-9\n');
    const decimal = keepCaptureParts([[1, 1]], 10, 'decimal-text');
    for await (const block of (await openCapture(csv)).blocks()) decimal.add(block);
    const [part] = [...decimal.parts()];
    const [block] = [...part!.blocks()];
    expect([block!.x[0], block!.y[0], block!.firstIndex]).toEqual([0.7, 1e-9, 1]);
    expect(() => keepCaptureParts([[10, 5], [12, 5]], 64, 'int16')).toThrow(/parts\[1\] must be a part starting at an integer from 15/);
    expect(() => keepCaptureParts([[10, 0]], 64, 'int16')).toThrow(/parts\[0\] must be/);
  });

  it('int16Blocks: an int16 capture\'s x and y as stored, in Int16Array, the values of the Float64Array blocks, for any part and block size', async () => {
    await fc.assert(
      fc.asyncProperty(
        fc.integer({ min: 0, max: N }),
        fc.integer({ min: 1, max: 5000 }),
        fc.integer({ min: 4, max: 70_000 }),
        fc.boolean(),
        async (startSample, blockSize, readChunkBytes, swapped) => {
          // Swapped channels are not adjacent in x-then-y order: the reader's loop, not the kernel's pass.
          const channels = swapped ? { xChannel: 2, yChannel: 1 } : {};
          const capture = await openCapture(wav, { startSample, blockSize, readChunkBytes, int16Blocks: true, ...channels });
          const x: number[] = [], y: number[] = [];
          for await (const block of capture.blocks()) {
            expect(block.x).toBeInstanceOf(Int16Array);
            expect(block.channels).toEqual([block.x, block.y]);
            x.push(...block.x);
            y.push(...block.y);
          }
          expect(x).toEqual((swapped ? whole.y : whole.x).slice(startSample));
          expect(y).toEqual((swapped ? whole.x : whole.y).slice(startSample));
        },
      ),
      { numRuns: 40 },
    );
  });

  it('int16Blocks: Float64Array where there are more than two outputs or the samples are not int16; a non-boolean is refused', async () => {
    const outputs = await openCapture(three, { channels: [1, 2, 3], int16Blocks: true });
    for await (const block of outputs.blocks()) expect(block.x).toBeInstanceOf(Float64Array);
    // Two adjacent outputs of three (6-byte frames): Int16Array, through the kernel's one-at-a-time path.
    const pair = await openCapture(three, { xChannel: 2, yChannel: 3, int16Blocks: true, blockSize: 333 });
    const second: number[] = [];
    for await (const block of pair.blocks()) {
      expect(block.y).toBeInstanceOf(Int16Array);
      second.push(...block.y);
    }
    expect(second).toEqual(whole.x.map((v) => 0 - v)); // 0 - v: no -0, as int16 has none
    const float = dir.file('float.wav');
    const writer = await createCaptureWriter(float, { format: 'wav', rateHz: 1000, encoding: 'float32' });
    await writer.write([0.5, -0.25], [0.125, 1], 2);
    await writer.close();
    const floats = await openCapture(float, { int16Blocks: true });
    for await (const block of floats.blocks()) expect([block.x instanceof Float64Array, ...block.x]).toEqual([true, 0.5, -0.25]);
    await expect(openCapture(wav, { int16Blocks: 'yes' } as never)).rejects.toThrow(/int16Blocks must be true or false \(got "yes"\)/);
  });
});
