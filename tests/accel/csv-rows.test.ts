// The CSV row kernel (src/accel/csv-rows.ts): on any bytes it takes the rows the JavaScript one-pass row parser
// (FastRowParser) takes, with the same doubles to the bit, and stops at the same row; it may leave a row with more
// than 18 mantissa digits to the JavaScript parsers. Reference for the doubles: ECMAScript Number(), which rounds
// decimal text correctly to the nearest double, checked against the JavaScript parser in
// tests/capture/parse-number.test.ts.
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { createCsvRowKernel } from '../../src/accel/csv-rows.js';
import { FastRowParser } from '../../src/io/capture/parse-number.js';

/** Numbers as acquisition software writes them: integers, fixed decimals, exponents, signs, leading zeros. */
const plainNumber = fc.oneof(
  { weight: 4, arbitrary: fc.integer({ min: -40_000, max: 40_000 }).map(String) },
  { weight: 4, arbitrary: fc.tuple(fc.double({ min: -1e6, max: 1e6, noNaN: true }), fc.integer({ min: 0, max: 9 })).map(([v, d]) => v.toFixed(d)) },
  fc.tuple(fc.integer({ min: -99_999, max: 99_999 }), fc.constantFrom('e', 'E', 'e+', 'E-'), fc.integer({ min: 0, max: 24 })).map(([m, e, k]) => `${m / 100}${e}${k}`),
  fc.stringMatching(/^[+-]?0{0,20}[0-9]{0,9}\.?[0-9]{0,9}$/).filter((text) => /[0-9]/.test(text)),
);
/** Besides those, texts with long mantissas and large exponents (the JavaScript parsers' share). */
const goodNumber = fc.oneof(
  { weight: 12, arbitrary: plainNumber },
  fc.tuple(fc.double({ noNaN: true, noDefaultInfinity: true }), fc.integer({ min: 0, max: 17 })).map(([v, d]) => v.toExponential(d)),
  fc.double({ noNaN: true, noDefaultInfinity: true }).map(String),
  fc.stringMatching(/^[+-]?[0-9]{1,22}(\.[0-9]{0,22})?([eE][+-]?[0-9]{1,3})?$/),
);
const badNumber = fc.constantFrom('', ' 1', '1 ', 'NaN', 'inf', '-Infinity', '1e', '1e+', '--1', '.', '+', '-', '1.2.3', 'e5', '0x10', '12abc', '1\r2', '1,5e');
const field = fc.oneof({ weight: 60, arbitrary: goodNumber }, { weight: 1, arbitrary: badNumber });
const ending = fc.oneof({ weight: 12, arbitrary: fc.constantFrom('\n', '\r\n') }, { weight: 1, arbitrary: fc.constantFrom('\r', '\r\r\n', '') });

/**
 * Rows of `columns` fields; when `mixed`, now and then a bad field or line ending, a row of another count, a comment
 * or a blank line.
 */
function lines(columns: number, mixed: boolean): fc.Arbitrary<string[]> {
  if (!mixed) {
    const row = fc.tuple(fc.array(plainNumber, { minLength: columns, maxLength: columns }), fc.constantFrom('\n', '\r\n'));
    return fc.array(row.map(([fields, end]) => fields.join(',') + end), { minLength: 1, maxLength: 60 });
  }
  const line = fc.oneof(
    { weight: 40, arbitrary: fc.tuple(fc.array(field, { minLength: columns, maxLength: columns }), ending).map(([fields, end]) => fields.join(',') + end) },
    { weight: 1, arbitrary: fc.tuple(fc.array(field, { minLength: 1, maxLength: 7 }), ending).map(([fields, end]) => fields.join(',') + end) },
    { weight: 1, arbitrary: fc.constantFrom('# note\n', '\n', '  \r\n') },
  );
  return fc.array(line, { maxLength: 40 });
}

const layout = (mixed: boolean) =>
  fc.integer({ min: 1, max: 6 }).chain((columns) =>
    fc.record({
      columns: fc.constant(columns),
      x: fc.integer({ min: 0, max: columns - 1 }),
      y: fc.integer({ min: 0, max: columns - 1 }),
      t: fc.integer({ min: -1, max: columns - 1 }),
      extra: fc.array(fc.integer({ min: 0, max: columns - 1 }), { maxLength: 2 }),
      lines: lines(columns, mixed),
    }),
  );

/** Mantissa digits of the field with the most, in a row's text. */
function mostDigits(row: string): number {
  return Math.max(...row.split(',').map((text) => text.replace(/[eE].*$/s, '').replace(/[^0-9]/g, '').length));
}

describe('CSV row kernel', () => {
  it('is WebAssembly in this Node', () => {
    expect(createCsvRowKernel(100, 10, 2)).not.toBeNull();
  });

  it.each([
    ['rows of numbers', false],
    ['rows with bad fields, line endings and counts, comments and blank lines', true],
  ])('takes the rows the JavaScript row parser takes, with the same doubles, from any start to any limit: %s', (_, mixed) => {
    fc.assert(
      fc.property(
        layout(mixed),
        fc.nat(),
        fc.nat(),
        fc.integer({ min: 0, max: 3 }),
        fc.oneof(fc.constant(56), fc.integer({ min: 0, max: 50 })),
        fc.constantFrom(12, 40, 65_536, 65_536, 65_536, 65_536),
        ({ lines: rows, ...plan }, startDraw, limitDraw, index, room, maxLineBytes) => {
          const text = rows.join('');
          const bytes = Buffer.from(text, 'latin1');
          // Mostly at a row's start, as the reader calls it; now and then anywhere.
          const starts = rows.map((_, k) => rows.slice(0, k).join('').length);
          const start = startDraw % 8 === 0 || starts.length === 0 ? startDraw % (bytes.length + 1) : starts[startDraw % starts.length]!;
          // Past the start, as the reader calls it (the JavaScript parser reads a limit of 0 as the end of the bytes).
          const limit = limitDraw % 3 !== 0 || start === bytes.length ? bytes.length : start + 1 + (limitDraw % (bytes.length - start));
          const capacity = index + room;
          const blockSize = 60;
          const kernel = createCsvRowKernel(bytes.length + 1, blockSize, 2 + plan.extra.length)!;
          kernel.configure({ ...plan, maxLineBytes });
          kernel.bytes.set(bytes);
          const taken = kernel.rows(start, limit, index, capacity);

          const names = Array.from({ length: plan.columns }, (_, k) => `c${k}`);
          const parser = new FastRowParser({ names, ...plan }, maxLineBytes);
          const js = { x: new Float64Array(blockSize), y: new Float64Array(blockSize), t: new Float64Array(blockSize), extra: plan.extra.map(() => new Float64Array(blockSize)) };
          const expected = parser.parse(bytes, start, limit, index, capacity, js.x, js.y, plan.t === -1 ? null : js.t, js.extra);

          expect(taken).toBeLessThanOrEqual(expected);
          const same = (a: Float64Array, b: Float64Array): boolean => {
            for (let k = index; k < index + taken; k++) if (!Object.is(a[k], b[k])) return false;
            return true;
          };
          expect(same(kernel.x, js.x)).toBe(true);
          expect(same(kernel.y, js.y)).toBe(true);
          if (plan.t !== -1) expect(same(kernel.t, js.t)).toBe(true);
          plan.extra.forEach((_, k) => expect(same(kernel.extra[k]!, js.extra[k]!)).toBe(true));
          if (taken === expected) {
            expect(kernel.position).toBe(parser.position);
          } else {
            // Stopped early only at a row with a mantissa too long for its 18 digits.
            const rowEnd = text.indexOf('\n', kernel.position);
            expect(mostDigits(text.slice(kernel.position, rowEnd))).toBeGreaterThan(18);
          }
        },
      ),
      { numRuns: 1500 },
    );
  });

  it('reads each field layout: ±0, signs, points at either end, exponents, CR LF', () => {
    const kernel = createCsvRowKernel(200, 10, 2)!;
    kernel.configure({ columns: 3, x: 1, y: 2, t: 0, extra: [], maxLineBytes: 65_536 });
    const text = '-0,+7,.5\r\n1.,-12345678.12345678,1e3\n0.000001,-3E-2,99999999\n';
    kernel.bytes.set(Buffer.from(text, 'latin1'));
    expect(kernel.rows(0, text.length, 0, 10)).toBe(3);
    expect(kernel.position).toBe(text.length);
    expect(Array.from(kernel.t.subarray(0, 3))).toEqual([-0, 1, 0.000001]);
    expect(Object.is(kernel.t[0], -0)).toBe(true);
    expect(Array.from(kernel.x.subarray(0, 3))).toEqual([7, -12345678.12345678, -0.03]);
    expect(Array.from(kernel.y.subarray(0, 3))).toEqual([0.5, 1000, 99999999]);
  });

  it('stops at the last LF, at the capacity and at a row over the length limit', () => {
    const kernel = createCsvRowKernel(200, 10, 2)!;
    kernel.configure({ columns: 2, x: 0, y: 1, t: -1, extra: [], maxLineBytes: 5 });
    const text = '1,2\n3,4\n55,666\n7,8';
    kernel.bytes.set(Buffer.from(text, 'latin1'));
    expect(kernel.rows(0, text.length, 0, 1)).toBe(1);
    expect(kernel.position).toBe(4);
    expect(kernel.rows(4, text.length, 1, 10)).toBe(1);
    expect(kernel.position).toBe(8);
    expect(kernel.rows(8, text.length, 2, 10)).toBe(0);
    expect(kernel.position).toBe(8);
    expect(kernel.rows(15, text.length, 2, 10)).toBe(0);
    expect(kernel.position).toBe(15);
  });
});
