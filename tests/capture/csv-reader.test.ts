import { afterAll, describe, expect, it } from 'vitest';
import { writeFileSync } from 'node:fs';
import { CaptureFormatError, openCapture } from '../../src/io/capture/index.js';
import { collect, makeTempDir } from './helpers.js';

const dir = makeTempDir();
afterAll(() => dir.remove());

function csv(name: string, text: string): string {
  const path = dir.file(name);
  writeFileSync(path, text);
  return path;
}

describe('CSV capture reader', () => {
  it('reads metadata, header, t column, CRLF, blank lines and a missing final newline', async () => {
    const path = csv(
      'basic.csv',
      '# rate_hz: 1000\r\n# adc: int16\r\n# operator note without a colon\r\nt,x,y\r\n\r\n0,1,-2\r\n0.001, 3 ,4\r\n\r\n# a comment between rows\r\n0.002,-5,6',
    );
    const got = await collect(path);
    expect(got.error).toBeNull();
    expect(got.x).toEqual([1, 3, -5]);
    expect(got.y).toEqual([-2, 4, 6]);
    expect(got.t).toEqual([0, 0.001, 0.002]);
    expect(got.info).toMatchObject({
      format: 'csv',
      rateHz: 1000,
      rateSource: 'metadata',
      channelNames: ['t', 'x', 'y'],
      xChannel: 'x',
      yChannel: 'y',
      timeColumn: 't',
      sampleEncoding: 'integer-text',
      totalSamples: null,
      adc: { kind: 'int16' },
    });
    expect([...got.info.metadata]).toEqual([
      ['rate_hz', '1000'],
      ['adc', 'int16'],
    ]);
  });

  it('estimates the rate from the t column when nothing else states it, and the option overrides every source', async () => {
    const path = csv('times.csv', 't,x,y\n0,0.5,1\n0.0005,0.25,1\n0.001,0,1\n0.0015,1,1\n');
    const estimated = await collect(path);
    expect(estimated.info.rateSource).toBe('t-column');
    expect(estimated.info.rateHz).toBeCloseTo(2000, 9);
    expect(estimated.info.sampleEncoding).toBe('decimal-text');
    const given = await collect(path, { rateHz: 48_000 });
    expect(given.info).toMatchObject({ rateHz: 48_000, rateSource: 'option' });
    expect(given.t).toEqual([0, 0.0005, 0.001, 0.0015]);
  });

  it('picks channels by name or by 1-based column number and can ignore the time column', async () => {
    const path = csv('many.csv', '# rate_hz: 10\nt,a,b,c\n0,1,2,3\n0.1,4,5,6\n');
    const byName = await collect(path, { xChannel: 'c', yChannel: 'a' });
    expect(byName.x).toEqual([3, 6]);
    expect(byName.y).toEqual([1, 4]);
    const byNumber = await collect(path, { xChannel: 2, yChannel: 3, timeColumn: null });
    expect(byNumber.x).toEqual([1, 4]);
    expect(byNumber.y).toEqual([2, 5]);
    expect(byNumber.t).toBeNull();
    expect(byNumber.info.timeColumn).toBeNull();
  });

  it('strips a UTF-8 byte order mark and quotes around header names', async () => {
    const path = csv('bom.csv', '\uFEFF"x","y"\n1,2\n');
    const got = await collect(path, { rateHz: 1 });
    expect(got.info.channelNames).toEqual(['x', 'y']);
    expect(got.x).toEqual([1]);
  });

  it('delivers nothing, without error, for a header with no rows', async () => {
    const got = await collect(csv('empty-rows.csv', 'x,y\n'), { rateHz: 5 });
    expect(got.error).toBeNull();
    expect(got.blockLengths).toEqual([]);
  });

  it('gives full blocks of the chosen size and a short last block whose arrays have its length', async () => {
    const rows = Array.from({ length: 10 }, (_, i) => `${i},${-i}`).join('\n');
    const got = await collect(csv('blocks.csv', `x,y\n${rows}\n`), { rateHz: 1, blockSize: 4 });
    expect(got.blockLengths).toEqual([4, 4, 2]);
    expect(got.contiguous).toBe(true);
    expect(got.x).toEqual([0, 1, 2, 3, 4, 5, 6, 7, 8, 9]);
  });

  it('closes the file when the loop ends early', async () => {
    const capture = await openCapture(csv('early.csv', 'x,y\n1,2\n3,4\n'), { rateHz: 1, blockSize: 1 });
    for await (const block of capture) {
      expect(block.x[0]).toBe(1);
      break;
    }
    await capture.close();
    expect(() => capture.blocks()).toThrow(/once/);
  });
});

describe('CSV capture errors', () => {
  async function failure(path: string, options = {}): Promise<{ error: CaptureFormatError; delivered: number }> {
    const got = await collect(path, options);
    expect(got.error).toBeInstanceOf(CaptureFormatError);
    return { error: got.error as CaptureFormatError, delivered: got.x.length };
  }

  it('stops at a row with too few columns, after delivering the good rows before it', async () => {
    const path = csv('short-row.csv', '# rate_hz: 1\nt,x,y\n0,1,2\n1,3,4\n2,5\n3,7,8\n');
    const { error, delivered } = await failure(path, { blockSize: 1 });
    expect(error.message).toBe(`${path} line 5: expected 3 columns (t,x,y), got "2,5"`);
    expect(error).toMatchObject({ file: path, line: 5, byteOffset: null, expected: '3 columns (t,x,y)', got: '2,5' });
    expect(delivered).toBe(2);
  });

  it('delivers the good rows of a partly filled block before the error', async () => {
    const path = csv('mid-block.csv', 'x,y\n1,2\n3,4\n5,abc\n');
    const got = await collect(path, { rateHz: 1, blockSize: 100 });
    expect(got.x).toEqual([1, 3]);
    expect((got.error as Error).message).toBe(`${path} line 4: expected a number in column "y" (column 2 of x,y), got "5,abc"`);
  });

  it('reports a truncated last line (no newline, missing fields)', async () => {
    const path = csv('truncated.csv', 't,x,y\n0,1,2\n0.5,3,4\n1.0,5');
    const { error, delivered } = await failure(path);
    expect(error.line).toBe(4);
    expect(error.expected).toBe('3 columns (t,x,y)');
    expect(delivered).toBe(2);
  });

  it('reports a row with too many columns and an empty field', async () => {
    expect((await failure(csv('long-row.csv', 'x,y\n1,2,3\n'), { rateHz: 1 })).error.message).toMatch(/line 2: expected 2 columns \(x,y\), got "1,2,3"$/);
    expect((await failure(csv('empty-field.csv', 'x,y\n1,\n'), { rateHz: 1 })).error.message).toMatch(/line 2: expected a number in column "y"/);
  });

  it('requires a header line of names', async () => {
    await expect(openCapture(csv('no-header.csv', '1,2\n3,4\n'), { rateHz: 1 })).rejects.toThrow(
      /no-header\.csv line 1: expected a header line of non-empty column names \(e\.g\. "t,x,y"\), got "1,2"/,
    );
    await expect(openCapture(csv('only-comments.csv', '# rate_hz: 5\n\n'))).rejects.toThrow(/line 3: expected a header line naming the columns/);
    await expect(openCapture(csv('dup.csv', 'x,y,x\n'), { rateHz: 1 })).rejects.toThrow(/column "x" appears twice/);
  });

  it('names a missing column and where it looked', async () => {
    await expect(openCapture(csv('cols.csv', '# rate_hz: 1\na,b\n1,2\n'))).rejects.toThrow(
      /cols\.csv line 2: expected a column named "x" for option xChannel, in header, got "a,b"/,
    );
    await expect(openCapture(csv('cols2.csv', '# rate_hz: 1\nx,y\n1,2\n'), { yChannel: 3 })).rejects.toThrow(/a column number 3 \(1-based\) for option yChannel/);
  });

  it('requires a sample rate from the t column, metadata or the option', async () => {
    await expect(openCapture(csv('no-rate.csv', 'x,y\n1,2\n'))).rejects.toThrow(
      /no-rate\.csv line 1: expected a sample rate: a "t" column, a "# rate_hz: <Hz>" line or the rateHz option/,
    );
    await expect(openCapture(csv('bad-rate.csv', '# rate_hz: fast\nx,y\n1,2\n'))).rejects.toThrow(/bad-rate\.csv line 1: expected "rate_hz" to be a positive number of Hz, got "fast"/);
    await expect(openCapture(csv('one-time.csv', 't,x,y\n0,1,2\n'))).rejects.toThrow(/increasing times in the first rows of column "t"/);
  });

  it('checks the adc metadata', async () => {
    await expect(openCapture(csv('adc.csv', '# adc: int99\nx,y\n1,2\n'), { rateHz: 1 })).rejects.toThrow(/adc\.csv line 1: expected "adc" to be int<bits>/);
    const unsigned = await openCapture(csv('adc12.csv', '# adc: uint12\nx,y\n1,2\n'), { rateHz: 1 });
    expect(unsigned.info.adc).toEqual({ kind: 'unsigned', bits: 12 });
    await unsigned.close();
    const float = await openCapture(csv('adcf.csv', '# adc: float\n# adc_full_scale: 2.5\nx,y\n1,2\n'), { rateHz: 1 });
    expect(float.info.adc).toEqual({ kind: 'float', fullScale: 2.5 });
    await float.close();
  });

  it('bounds memory on a line without newlines', async () => {
    const path = csv('endless.csv', `x,y\n1,2\n${'1'.repeat(70_000)}`);
    const { error, delivered } = await failure(path, { rateHz: 1, readChunkBytes: 4096 });
    expect(error.line).toBe(3);
    expect(error.expected).toBe('a line of at most 65536 bytes (line ending not counted)');
    expect(delivered).toBe(1);
    await expect(openCapture(csv('endless-header.csv', 'x'.repeat(70_000)), { rateHz: 1 })).rejects.toThrow(/line 1: expected a line of at most 65536 bytes/);
  });

  it('enforces the 65 536-byte line limit exactly, whatever the read chunk size', async () => {
    // A third column holds filler text (other columns are only counted), so a valid row can have any length.
    const row = (bytes: number) => `1,2,${'a'.repeat(bytes - 4)}`;
    for (const ending of ['\n', '\r\n']) {
      const fits = csv('fits.csv', `x,y,note${ending}${row(65_536)}${ending}3,4,b${ending}`);
      const over = csv('over.csv', `x,y,note${ending}1,2,c${ending}${row(65_537)}${ending}3,4,b${ending}`);
      for (const readChunkBytes of [997, 4096, 65_535, 65_536, 65_537, 262_144]) {
        const good = await collect(fits, { rateHz: 1, readChunkBytes });
        expect(good.error).toBeNull();
        expect(good.x).toEqual([1, 3]);
        const bad = await collect(over, { rateHz: 1, readChunkBytes });
        expect(bad.error).toBeInstanceOf(CaptureFormatError);
        expect((bad.error as CaptureFormatError).line).toBe(3);
        expect(bad.x).toEqual([1]);
      }
    }
    // The header obeys the same limit.
    const header = `x,y,${'n'.repeat(65_532)}`;
    expect((await collect(csv('long-header.csv', `${header}\n1,2,3\n`), { rateHz: 1, readChunkBytes: 1000 })).error).toBeNull();
    await expect(openCapture(csv('too-long-header.csv', `${header}m\n1,2,3\n`), { rateHz: 1, readChunkBytes: 1000 })).rejects.toThrow(/line 1: expected a line of at most 65536 bytes/);
  });

  it('rejects invalid options, naming option, rule and value', async () => {
    const path = csv('opts.csv', 'x,y\n1,2\n');
    await expect(openCapture(path, { blockSize: 0 })).rejects.toThrow('blockSize must be an integer in 1..1048576 (got 0)');
    await expect(openCapture(path, { readChunkBytes: 1.5 })).rejects.toThrow('readChunkBytes must be an integer in 1..67108864 (got 1.5)');
    await expect(openCapture(path, { rateHz: -5 })).rejects.toThrow('rateHz must be a positive finite number (got -5)');
    await expect(openCapture(path, { xChannel: 0 })).rejects.toThrow('xChannel must be an integer in 1..65535 (got 0)');
  });
});

describe('CSV edge layouts', () => {
  it('skips blank lines in a file that reads x and y from one column', async () => {
    const got = await collect(csv('one-column.csv', 'v\n1\n\n  \n2\n'), { rateHz: 1, xChannel: 'v', yChannel: 'v' });
    expect(got.error).toBeNull();
    expect(got.x).toEqual([1, 2]);
    expect(got.y).toEqual([1, 2]);
  });

  it('does not check other columns for numbers, only their count', async () => {
    const got = await collect(csv('labels.csv', 'x,label,y\n1,start,2\n3,,4\n'), { rateHz: 1 });
    expect(got.error).toBeNull();
    expect(got.x).toEqual([1, 3]);
  });
});
