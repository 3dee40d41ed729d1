// The CSV reader with its WebAssembly row kernel (src/accel/csv-rows.ts) and without WebAssembly (the JavaScript
// row parsers alone, as on an engine that lacks it) deliver the same samples to the bit, in the same blocks, and
// stop with the same error (file, line, what was expected, what was found), for random valid and invalid texts read
// in random chunk and block sizes. The JavaScript path is itself checked against Number() in properties.test.ts.
import { afterAll, afterEach, describe, expect, it, vi } from 'vitest';
import fc from 'fast-check';
import { writeFileSync } from 'node:fs';
import { openCapture, type OpenCaptureOptions } from '../../src/io/capture/index.js';
import { makeTempDir } from './helpers.js';

const dir = makeTempDir();
afterAll(() => dir.remove());
afterEach(() => vi.unstubAllGlobals());
let fileCounter = 0;

interface Read {
  channels: number[][];
  t: number[] | null;
  blocks: number[];
  sampleEncoding: string;
  rateHz: number;
  error: string | null;
}

async function read(path: string, options: OpenCaptureOptions, withWebAssembly: boolean): Promise<Read> {
  // The kernel is made when the capture opens: without WebAssembly there, the reader keeps its JavaScript parsers.
  if (!withWebAssembly) vi.stubGlobal('WebAssembly', undefined);
  let capture;
  try {
    capture = await openCapture(path, options);
  } catch (error) {
    return { channels: [], t: null, blocks: [], sampleEncoding: '', rateHz: 0, error: String(error) };
  } finally {
    vi.unstubAllGlobals();
  }
  const got: Read = { channels: [], t: null, blocks: [], sampleEncoding: capture.info.sampleEncoding, rateHz: capture.info.rateHz, error: null };
  try {
    for await (const block of capture) {
      got.blocks.push(block.length);
      block.channels.forEach((channel, k) => (got.channels[k] ??= []).push(...channel));
      if (block.t !== null) (got.t ??= []).push(...block.t);
    }
  } catch (error) {
    got.error = String(error);
  }
  return got;
}

/** Arrays equal as Object.is has it (-0 is not 0; NaN is NaN). */
function same(a: readonly number[] | null, b: readonly number[] | null): boolean {
  if (a === null || b === null) return a === b;
  return a.length === b.length && a.every((v, k) => Object.is(v, b[k]));
}

const number = fc.oneof(
  { weight: 6, arbitrary: fc.integer({ min: -40_000, max: 40_000 }).map(String) },
  { weight: 6, arbitrary: fc.tuple(fc.double({ min: -1e4, max: 1e4, noNaN: true }), fc.integer({ min: 0, max: 9 })).map(([v, d]) => v.toFixed(d)) },
  fc.tuple(fc.double({ noNaN: true, noDefaultInfinity: true }), fc.integer({ min: 0, max: 17 })).map(([v, d]) => v.toExponential(d)),
  fc.double({ noNaN: true }).map(String),
  fc.stringMatching(/^[+-]?[0-9]{0,21}\.?[0-9]{0,21}([eE][+-]?[0-9]{1,2})?$/).filter((text) => /[0-9]/.test(text)),
  fc.constantFrom(' 12 ', 'NaN', '-inf', '+0', '-0', '.5', '5.'),
);
const bad = fc.constantFrom('', 'x', '1e', '--1', '.', '1.2.3', '0x10', '12abc', '1 2');

/** A CSV text of `columns` columns: metadata, a header, rows with now and then a comment, a blank or a bad line. */
const text = fc.integer({ min: 2, max: 5 }).chain((columns) => {
  const names = ['x', 'y', 't', 'a', 'b'].slice(0, columns);
  const field = fc.oneof({ weight: 40, arbitrary: number }, { weight: 1, arbitrary: bad });
  const row = fc.tuple(fc.array(field, { minLength: columns, maxLength: columns }), fc.constantFrom('\n', '\n', '\r\n'));
  const line = fc.oneof(
    { weight: 30, arbitrary: row.map(([fields, end]) => fields.join(',') + end) },
    { weight: 1, arbitrary: fc.constantFrom('# a comment\n', '\n', '  \r\n', '1,2,3,4,5,6\n', '7\n') },
  );
  return fc.record({
    names: fc.shuffledSubarray(names, { minLength: names.length, maxLength: names.length }),
    preamble: fc.constantFrom('', '# rate_hz: 1000\n', '\uFEFF# rate_hz: 10\r\n# adc: int16\r\n\r\n'),
    rows: fc.array(line, { maxLength: 80 }),
    finalNewline: fc.boolean(),
    channels: fc.constantFrom<OpenCaptureOptions['channels'] | undefined>(undefined, ['x', 'y'], ['y', 'x', 'x'], [2, 1, 'x', 1]),
    timeColumn: fc.constantFrom<OpenCaptureOptions['timeColumn']>(undefined, null),
  });
});

const sizes = fc.record({ readChunkBytes: fc.oneof(fc.integer({ min: 1, max: 300 }), fc.constant(65_536)), blockSize: fc.integer({ min: 1, max: 50 }) });

describe('CSV reader with and without its WebAssembly kernel', () => {
  it('delivers the same samples, blocks and errors for any text, chunk size and block size', async () => {
    await fc.assert(
      fc.asyncProperty(text, sizes, async (drawn, size) => {
        let body = drawn.rows.join('');
        if (!drawn.finalNewline) body = body.replace(/\r?\n$/, '');
        const path = dir.file(`fast-path-${fileCounter++}.csv`);
        writeFileSync(path, `${drawn.preamble}${drawn.names.join(',')}\n${body}`, 'latin1');
        const options: OpenCaptureOptions = { ...size, rateHz: 1000, ...(drawn.channels === undefined ? {} : { channels: drawn.channels }), ...(drawn.timeColumn === undefined ? {} : { timeColumn: drawn.timeColumn }) };
        const fast = await read(path, options, true);
        const plain = await read(path, options, false);
        expect(fast.error).toBe(plain.error);
        expect(fast.blocks).toEqual(plain.blocks);
        expect(fast.channels.length).toBe(plain.channels.length);
        fast.channels.forEach((channel, k) => expect(same(channel, plain.channels[k]!)).toBe(true));
        expect(same(fast.t, plain.t)).toBe(true);
        expect(fast.sampleEncoding).toBe(plain.sampleEncoding);
      }),
      { numRuns: 300 },
    );
  });

  it('reads a capture without WebAssembly', async () => {
    const path = dir.file('no-webassembly.csv');
    writeFileSync(path, '# rate_hz: 10\nx,y\n1,2\r\n-3.5,4e1\n# note\n5,x\n');
    const got = await read(path, { blockSize: 2 }, false);
    expect(got.channels).toEqual([
      [1, -3.5],
      [2, 40],
    ]);
    expect(got.error).toContain(`${path} line 6: expected a number in column "y"`);
  });
});
