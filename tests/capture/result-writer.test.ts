import { afterAll, describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { existsSync, readdirSync, readFileSync } from 'node:fs';
import { PassThrough } from 'node:stream';
import { AlarmBit } from '../../src/core/index.js';
import { createResultWriter, RESULT_COLUMNS, type ResultBlock, type ResultWriterOptions } from '../../src/io/results/index.js';
import { makeTempDir } from './helpers.js';

const dir = makeTempDir();
afterAll(() => dir.remove());

function series(length: number, firstIndex = 0): ResultBlock {
  const positionM = new Float64Array(length);
  const velocityMS = new Float64Array(length);
  const level = new Float32Array(length);
  const flags = new Uint8Array(length);
  for (let i = 0; i < length; i++) {
    const n = firstIndex + i;
    positionM[i] = 1.5e-7 * n + 1e-12 * (n % 7);
    velocityMS[i] = 0.03 * Math.sin(n / 5);
    level[i] = 0.5 + 0.25 * Math.cos(n / 3);
    flags[i] = n % 11 === 0 ? AlarmBit.lowSignal | AlarmBit.overspeed : n % 13 === 0 ? AlarmBit.countLost : 0;
  }
  return { firstIndex, length, positionM, velocityMS, level, flags };
}

function slice(block: ResultBlock, start: number, end: number): ResultBlock {
  return {
    firstIndex: block.firstIndex + start,
    length: end - start,
    positionM: block.positionM.subarray(start, end),
    velocityMS: block.velocityMS.subarray(start, end),
    level: block.level.subarray(start, end),
    flags: block.flags.subarray(start, end),
    t: block.t === undefined || block.t === null ? null : block.t.subarray(start, end),
  };
}

/** Writes the blocks to an in-memory standard output and returns the text. */
async function toText(blocks: readonly ResultBlock[], options: Omit<ResultWriterOptions, 'stdout'>): Promise<string> {
  const { stdout, parts } = capturedStdout();
  const writer = await createResultWriter('-', { ...options, stdout });
  for (const block of blocks) await writer.write(block);
  await writer.close();
  return Buffer.concat(parts).toString('utf8');
}

/** A stream for the writer's stdout, and the chunks that went through it. */
function capturedStdout(): { stdout: PassThrough; parts: Buffer[] } {
  const stdout = new PassThrough();
  const parts: Buffer[] = [];
  stdout.on('data', (part: Buffer) => parts.push(part));
  return { stdout, parts };
}

describe('result writer', () => {
  it('writes the CSV header and rows with the documented columns, units and digits', async () => {
    const block: ResultBlock = {
      firstIndex: 0,
      length: 3,
      positionM: Float64Array.of(0, 1.234567890123456, -2.6e-12),
      velocityMS: Float64Array.of(0.1, -0.000000001, NaN),
      level: Float32Array.of(1, 0.5, 0),
      flags: Uint8Array.of(0, AlarmBit.saturation, AlarmBit.lowSignal | AlarmBit.countLost),
    };
    const text = await toText([block], { format: 'csv', rateHz: 1e6 });
    expect(text).toBe(
      [
        't,position_m,velocity_m_s,level,alarms',
        '0.000000000,0.000000000000,0.100000000,1.000000,',
        '0.000001000,1.234567890123,-0.000000001,0.500000,saturation',
        '0.000002000,-0.000000000003,NaN,0.000000,low_signal count_lost',
        '',
      ].join('\n'),
    );
    expect(RESULT_COLUMNS).toEqual(['t', 'position_m', 'velocity_m_s', 'level', 'alarms']);
  });

  it('writes JSON Lines with the same keys, alarms as one string and null for non-finite numbers', async () => {
    const block = { ...series(12), t: Float64Array.from({ length: 12 }, (_, i) => 10 + i * 0.5) };
    block.velocityMS[1] = Infinity;
    const lines = (await toText([block], { format: 'jsonl' })).trimEnd().split('\n');
    expect(lines).toHaveLength(12);
    const rows = lines.map((line) => JSON.parse(line) as Record<string, unknown>);
    expect(Object.keys(rows[0]!)).toEqual([...RESULT_COLUMNS]);
    expect(rows[0]).toMatchObject({ t: 10, alarms: 'low_signal overspeed' });
    expect(rows[1]).toMatchObject({ t: 10.5, velocity_m_s: null, alarms: '' });
    expect(rows[11]).toMatchObject({ alarms: 'low_signal overspeed' });
    expect(rows[3]!.position_m).toBeCloseTo(4.5e-7 + 3e-12, 12);
  });

  it('keeps every Nth absolute index, the same rows however the stream is cut into blocks', async () => {
    await fc.assert(
      fc.asyncProperty(
        fc.integer({ min: 1, max: 9 }),
        fc.integer({ min: 0, max: 30 }),
        fc.array(fc.integer({ min: 0, max: 120 }), { maxLength: 6 }),
        fc.constantFrom('csv' as const, 'jsonl' as const),
        async (every, firstIndex, cuts, format) => {
          const whole = series(120, firstIndex);
          const points = [...new Set([0, ...cuts, 120])].sort((a, b) => a - b);
          const pieces = points.slice(1).map((end, k) => slice(whole, points[k]!, end));
          const cutText = await toText(pieces, { format, every, rateHz: 1000 });
          const wholeText = await toText([whole], { format, every, rateHz: 1000 });
          expect(cutText).toBe(wholeText);
          const rows = wholeText.trimEnd().split('\n').slice(format === 'csv' ? 1 : 0);
          const expectedIndices = Array.from({ length: 120 }, (_, i) => firstIndex + i).filter((n) => n % every === 0);
          expect(rows.map((line) => Math.round(Number(format === 'csv' ? line.split(',')[0] : (JSON.parse(line) as { t: number }).t) * 1000))).toEqual(
            expectedIndices,
          );
        },
      ),
      { numRuns: 100 },
    );
  });

  // Listen hands the writer the pipeline's own arrays, reused for the next block as soon as write() returns.
  it('reads a block during the write call: arrays overwritten before the write settles change nothing', async () => {
    const whole = series(5000);
    const expected = await toText([whole], { format: 'csv', rateHz: 1000 });
    const { stdout, parts } = capturedStdout();
    const writer = await createResultWriter('-', { format: 'csv', rateHz: 1000, stdout });
    const reused = series(1000);
    for (let start = 0; start < 5000; start += 1000) {
      const piece = slice(whole, start, start + 1000);
      reused.positionM.set(piece.positionM);
      reused.velocityMS.set(piece.velocityMS);
      reused.level.set(piece.level);
      reused.flags.set(piece.flags);
      const written = writer.write({ ...reused, firstIndex: start });
      for (const array of [reused.positionM, reused.velocityMS, reused.level, reused.flags]) array.fill(7);
      await written;
    }
    await writer.close();
    // 5000 rows are about 300 kB: more than the writer's buffer, so its bytes went out in several writes.
    expect(parts.length).toBeGreaterThan(1);
    expect(Buffer.concat(parts).toString('utf8')).toBe(expected);
  });

  // A live source can hand out several blocks in one chunk (a live fit's held samples, a gap): their writes are
  // called before the first settles, and one of them may start writing bytes while the next formats rows.
  it('writes overlapping writes in order, to a file and to a stream', async () => {
    const whole = series(6000);
    const expected = await toText([whole], { format: 'csv', rateHz: 1000 });
    const own = makeTempDir();
    const path = own.file('overlap.csv');
    const { stdout, parts } = capturedStdout();
    for (const writer of [await createResultWriter(path, { format: 'csv', rateHz: 1000 }), await createResultWriter('-', { format: 'csv', rateHz: 1000, stdout })]) {
      const writes: Promise<void>[] = [];
      for (let start = 0; start < 6000; start += 1500) writes.push(writer.write(slice(whole, start, start + 1500)));
      await Promise.all(writes);
      await writer.close();
    }
    expect(readFileSync(path, 'utf8')).toBe(expected);
    expect(Buffer.concat(parts).toString('utf8')).toBe(expected);
    own.remove();
  });

  // Listen formats every block's rows with add() and waits only when the bytes went out (a few blocks in a hundred).
  it('add: the rows write gives, a promise only when bytes went out, errors thrown', async () => {
    const whole = series(6000);
    const expected = await toText([whole], { format: 'csv', rateHz: 1000 });
    const { stdout, parts } = capturedStdout();
    const writer = await createResultWriter('-', { format: 'csv', rateHz: 1000, stdout });
    let promises = 0;
    for (let start = 0; start < 6000; start += 100) {
      const sent = parts.length;
      const out = writer.add(slice(whole, start, start + 100));
      if (out === undefined) {
        // The rows only went into the buffer: nothing was written.
        await new Promise((resolve) => setImmediate(resolve));
        expect(parts.length).toBe(sent);
        continue;
      }
      promises++;
      await out;
      // Out by now: whole rows, at least the 64 KiB that made the writer write.
      const text = Buffer.concat(parts).toString('utf8');
      expect(text.length).toBeGreaterThanOrEqual(65_536);
      expect(text.endsWith('\n') && expected.startsWith(text)).toBe(true);
    }
    // About 370 kB of rows: a promise for each 64 KiB, none for the other blocks.
    expect(promises).toBeGreaterThanOrEqual(4);
    expect(promises).toBeLessThanOrEqual(6);
    expect(() => writer.add({ ...series(3), rateHz: 0 })).toThrow('block.rateHz must be a positive finite number (got 0)');
    await writer.close();
    expect(Buffer.concat(parts).toString('utf8')).toBe(expected);
    expect(() => writer.add(series(1))).toThrow(/the result writer is closed/);

    // An output that fails: the promise rejects, and the writer refuses further rows.
    const broken = new PassThrough({ highWaterMark: 16 });
    const failing = await createResultWriter('-', { format: 'csv', rateHz: 1, stdout: broken });
    broken.destroy(new Error('EPIPE: broken pipe'));
    await new Promise((resolve) => setImmediate(resolve));
    let out: Promise<void> | undefined;
    for (let k = 0; out === undefined; k++) out = failing.add(series(500, k * 500));
    await expect(out).rejects.toThrow(/EPIPE|destroyed/);
    expect(() => failing.add(series(1, 1e6))).toThrow(/an earlier write failed/);
  });

  it('writes a file under a temporary name, renamed at close; abort leaves nothing', async () => {
    const path = dir.file('rows.csv');
    const writer = await createResultWriter(path, { format: 'csv', rateHz: 10, every: 2 });
    await writer.write(series(10));
    expect(existsSync(path)).toBe(false);
    await writer.close();
    expect(writer.rowsWritten).toBe(5);
    expect(readFileSync(path, 'utf8').split('\n')).toHaveLength(7);
    const aborted = await createResultWriter(dir.file('aborted.jsonl'), { format: 'jsonl', rateHz: 10 });
    await aborted.write(series(10));
    await aborted.abort();
    expect(readdirSync(dir.path)).toEqual(['rows.csv']);
  });

  it("power 'auto': the first block decides the power column (listen learns the output count from the frames)", async () => {
    const withPower = { ...series(3), power: Float32Array.of(1, 0.5, 0.25) };
    const texts: string[] = [];
    for (const first of [withPower, series(3)]) {
      const path = dir.file(`auto-${texts.length}.csv`);
      const writer = await createResultWriter(path, { format: 'csv', rateHz: 10, power: 'auto' });
      await writer.write(first);
      await writer.close();
      texts.push(readFileSync(path, 'utf8'));
    }
    expect(texts[0]!.split('\n').slice(0, 2)).toEqual(['t,position_m,velocity_m_s,level,power,alarms', '0.000000000,0.000000000000,0.000000000,0.750000,1.000000,low_signal overspeed']);
    expect(texts[1]!.split('\n')[0]).toBe(RESULT_COLUMNS.join(','));
    const decided = await createResultWriter(dir.file('auto-then.csv'), { format: 'csv', rateHz: 10, power: 'auto' });
    await decided.write(withPower);
    await expect(decided.write(series(3, 3))).rejects.toThrow(/a block without power, for a writer with a power column/);
    await decided.abort();
    await expect(createResultWriter(dir.file('bad.csv'), { format: 'csv', power: 'yes' as unknown as boolean })).rejects.toThrow(/power must be true, false or 'auto'/);
  });

  it('takes the rate from the block when given there', async () => {
    const text = await toText([{ ...series(2, 4), rateHz: 2 }], { format: 'csv', rateHz: 1000 });
    expect(text.split('\n').slice(1, 3).map((line) => line.split(',')[0])).toEqual(['2.000000000', '2.500000000']);
  });

  it('writes a header even with no rows, so an empty result is a valid file', async () => {
    expect(await toText([], { format: 'csv' })).toBe('t,position_m,velocity_m_s,level,alarms\n');
    expect(await toText([], { format: 'jsonl' })).toBe('');
  });

  it('rejects bad options and blocks', async () => {
    await expect(createResultWriter('-', { format: 'csv', every: 0 })).rejects.toThrow('every must be an integer in 1..1000000000 (got 0)');
    await expect(createResultWriter('-', { format: 'tsv' as 'csv' })).rejects.toThrow('format must be "csv" or "jsonl" (got "tsv")');
    const writer = await createResultWriter('-', { format: 'csv', stdout: new PassThrough() });
    await expect(writer.write(series(3))).rejects.toThrow(/a block without t needs a rate \(block\.rateHz or the rateHz option\)/);
    await expect(writer.write({ ...series(3), rateHz: 0 })).rejects.toThrow('block.rateHz must be a positive finite number (got 0)');
    await expect(writer.write({ ...series(3), t: new Float64Array(3), level: new Float32Array(2) })).rejects.toThrow('block.level holds 2 values, fewer than length 3');
  });

  it('reports a standard output that fails (closed pipe) instead of dropping rows silently', async () => {
    const stdout = new PassThrough({ highWaterMark: 16 });
    const writer = await createResultWriter('-', { format: 'csv', rateHz: 1, stdout });
    stdout.destroy(new Error('EPIPE: broken pipe'));
    await new Promise((resolve) => setImmediate(resolve));
    await expect(
      (async () => {
        for (let k = 0; k < 10; k++) await writer.write(series(5000, k * 5000));
        await writer.close();
      })(),
    ).rejects.toThrow(/EPIPE|destroyed/);
  });
});
