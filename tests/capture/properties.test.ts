// Properties of the capture readers: the samples delivered depend on the file only, not on how it is cut into
// read chunks or blocks, nor on line endings, blank lines, comments or a missing final newline.
import { afterAll, describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { writeFileSync } from 'node:fs';
import { CaptureFormatError } from '../../src/io/capture/index.js';
import { collect, makeTempDir } from './helpers.js';
import { chunk, fmtBody, riff } from './riff-bytes.js';

const dir = makeTempDir();
afterAll(() => dir.remove());
let fileCounter = 0;
function write(extension: string, bytes: string | Uint8Array): string {
  const path = dir.file(`prop-${fileCounter++}.${extension}`);
  writeFileSync(path, bytes);
  return path;
}

const sizes = fc.record({ readChunkBytes: fc.integer({ min: 1, max: 300 }), blockSize: fc.integer({ min: 1, max: 40 }) });

const value = fc.oneof(fc.integer({ min: -1_000_000, max: 1_000_000 }), fc.double({ min: -1e9, max: 1e9 }));
const row = fc.record({
  t: fc.double({ min: 0, max: 1e4, noNaN: true }),
  x: value,
  y: value,
  spaced: fc.boolean(),
  crlf: fc.boolean(),
  before: fc.constantFrom('', '', '', '\n', '  \n', '# comment: between rows\n', '\r\n'),
});

describe('CSV reader properties', () => {
  it('delivers the same samples for any line layout, read chunk size and block size', async () => {
    await fc.assert(
      fc.asyncProperty(fc.array(row, { maxLength: 60 }), fc.boolean(), sizes, async (rows, finalNewline, options) => {
        let text = '# rate_hz: 100\nt,x,y\n';
        rows.forEach((r, index) => {
          const field = (v: number): string => (r.spaced ? ` ${String(v)} ` : String(v));
          const eol = index === rows.length - 1 && !finalNewline ? '' : r.crlf ? '\r\n' : '\n';
          text += `${r.before}${field(r.t)},${field(r.x)},${field(r.y)}${eol}`;
        });
        const got = await collect(write('csv', text), options);
        expect(got.error).toBeNull();
        expect(got.contiguous).toBe(true);
        // As written: String(-0) is "0".
        const asText = (v: number): number => Number(String(v));
        expect(got.x).toEqual(rows.map((r) => asText(r.x)));
        expect(got.y).toEqual(rows.map((r) => asText(r.y)));
        expect(got.t ?? []).toEqual(rows.map((r) => asText(r.t)));
        expect(got.blockLengths.every((length) => length >= 1 && length <= options.blockSize)).toBe(true);
        expect(got.blockLengths.slice(0, -1).every((length) => length === options.blockSize)).toBe(true);
      }),
      { numRuns: 150 },
    );
  });

  it('stops at the same line after the same samples whatever the chunk and block sizes', async () => {
    await fc.assert(
      fc.asyncProperty(
        fc.integer({ min: 0, max: 50 }),
        fc.constantFrom('1,2,3', '1;2', '1,x', ',', '1,2 3'),
        sizes,
        async (goodRows, badRow, options) => {
          const lines = Array.from({ length: goodRows }, (_, i) => `${i},${-i}`);
          const path = write('csv', `# rate_hz: 1\nx,y\n${lines.join('\n')}${goodRows > 0 ? '\n' : ''}${badRow}\n9,9\n`);
          const got = await collect(path, options);
          expect(got.x).toEqual(lines.map((_, i) => i));
          expect(got.error).toBeInstanceOf(CaptureFormatError);
          expect((got.error as CaptureFormatError).line).toBe(goodRows + 3);
        },
      ),
      { numRuns: 150 },
    );
  });
});

// Number texts as acquisition software writes them: signs, exponents of either case and sign, points at either
// end, leading zeros, and mantissas too long for the one-pass row parser (which leaves those rows to the general
// parser). Reference: ECMAScript Number() (StringToNumber), which rounds decimal text correctly to the nearest double.
const numberText = fc.oneof(
  fc.tuple(fc.double({ min: -1e6, max: 1e6, noNaN: true }), fc.integer({ min: 0, max: 20 })).map(([v, d]) => v.toFixed(d)),
  fc.tuple(fc.double({ noNaN: true, noDefaultInfinity: true }), fc.integer({ min: 0, max: 20 })).map(([v, d]) => v.toExponential(d)),
  fc.stringMatching(/^[+-]?[0-9]{1,18}(\.[0-9]{0,18})?([eE][+-]?[0-9]{1,3})?$/),
  fc.stringMatching(/^[+-]?\.[0-9]{1,12}$/),
  fc.integer({ min: -40_000, max: 40_000 }).map(String),
);

describe('CSV number texts', () => {
  it('reads every number text as Number() does, whatever the chunk and block sizes', async () => {
    await fc.assert(
      fc.asyncProperty(fc.array(fc.tuple(numberText, numberText, fc.boolean()), { minLength: 1, maxLength: 80 }), sizes, async (rows, options) => {
        const text = `# rate_hz: 1\nx,y\n${rows.map(([x, y, crlf]) => `${x},${y}${crlf ? '\r\n' : '\n'}`).join('')}`;
        const got = await collect(write('csv', text), options);
        expect(got.error).toBeNull();
        const same = (a: readonly number[], b: readonly number[]) => a.length === b.length && a.every((v, i) => Object.is(v, b[i]));
        expect(same(got.x, rows.map(([x]) => Number(x)))).toBe(true);
        expect(same(got.y, rows.map(([, y]) => Number(y)))).toBe(true);
      }),
      { numRuns: 200 },
    );
  });

  it('names the file and line of a field that is not a number, after the good rows before it', async () => {
    await fc.assert(
      fc.asyncProperty(
        fc.array(fc.tuple(numberText, numberText), { maxLength: 60 }),
        fc.constantFrom('1e', '--1', '1.2.3', '.', '+', '1e+', '0x10', '12abc', 'e5', '1 2'),
        fc.boolean(),
        sizes,
        async (rows, bad, inX, options) => {
          const path = write('csv', `# rate_hz: 1\nx,y\n${rows.map(([x, y]) => `${x},${y}\n`).join('')}${inX ? `${bad},1` : `1,${bad}`}\n2,2\n`);
          const got = await collect(path, options);
          expect(got.x.map((v) => Object.is(v, -0) ? 'neg0' : v)).toEqual(rows.map(([x]) => Object.is(Number(x), -0) ? 'neg0' : Number(x)));
          expect(got.error).toBeInstanceOf(CaptureFormatError);
          const error = got.error as CaptureFormatError;
          expect(error.line).toBe(rows.length + 3);
          expect(error.message).toContain(`${path} line ${rows.length + 3}`);
          expect(error.message).toContain(`column "${inX ? 'x' : 'y'}"`);
        },
      ),
      { numRuns: 150 },
    );
  });
});

describe('WAV reader properties', () => {
  const encodings = [
    { bits: 16, tag: 1, min: -32768, max: 32767 },
    { bits: 24, tag: 1, min: -8388608, max: 8388607 },
    { bits: 32, tag: 3, min: -1e30, max: 1e30 },
  ];

  it('delivers the same samples for any read chunk size, block size and channel count', async () => {
    await fc.assert(
      fc.asyncProperty(
        fc.integer({ min: 0, max: 2 }),
        fc.integer({ min: 2, max: 4 }),
        fc.integer({ min: 0, max: 80 }),
        sizes,
        fc.infiniteStream(fc.double({ min: 0, max: 1, maxExcluded: true, noNaN: true })),
        async (encodingIndex, channels, frames, options, uniform) => {
          const encoding = encodings[encodingIndex]!;
          const bytesPerSample = encoding.bits / 8;
          const data = Buffer.alloc(frames * channels * bytesPerSample);
          const expected: number[][] = Array.from({ length: channels }, () => []);
          const random = uniform[Symbol.iterator]();
          for (let f = 0; f < frames; f++) {
            for (let c = 0; c < channels; c++) {
              const at = (f * channels + c) * bytesPerSample;
              const u = random.next().value as number;
              if (encoding.tag === 3) {
                const v = Math.fround((u - 0.5) * 4);
                data.writeFloatLE(v, at);
                expected[c]!.push(v);
              } else {
                const v = Math.floor(encoding.min + u * (encoding.max - encoding.min + 1));
                data.writeIntLE(v, at, bytesPerSample);
                expected[c]!.push(v);
              }
            }
          }
          const path = write('wav', riff([chunk('fmt ', [...fmtBody(encoding.tag, channels, 1000, encoding.bits), ...(encoding.tag === 3 ? [0, 0] : [])]), chunk('data', [...data])]));
          const got = await collect(path, { ...options, xChannel: channels, yChannel: 1 });
          expect(got.error).toBeNull();
          expect(got.contiguous).toBe(true);
          expect(got.x).toEqual(expected[channels - 1]);
          expect(got.y).toEqual(expected[0]);
          expect(got.blockLengths.slice(0, -1).every((length) => length === options.blockSize)).toBe(true);
        },
      ),
      { numRuns: 150 },
    );
  });
});
