import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { createParsedNumber, FastRowParser, parseNumberBytes } from '../../src/io/capture/parse-number.js';

function parse(text: string): { ok: boolean; value: number; integer: boolean } {
  const out = createParsedNumber();
  const bytes = Buffer.from(text, 'latin1');
  parseNumberBytes(bytes, 0, bytes.length, out);
  return { ...out };
}

describe('parseNumberBytes', () => {
  // Reference: ECMAScript Number() (StringToNumber), which rounds decimal text correctly to the nearest double.
  it('agrees with Number() on the shortest text of any double', () => {
    fc.assert(
      fc.property(fc.double({ noNaN: true }), (value) => {
        const parsed = parse(String(value));
        expect(parsed.ok).toBe(true);
        expect(Object.is(parsed.value, value) || (value === 0 && parsed.value === 0)).toBe(true);
      }),
      { numRuns: 2000 },
    );
  });

  it('agrees with Number() on fixed, exponential and long-mantissa texts', () => {
    const texts = fc.oneof(
      fc.tuple(fc.double({ min: -1e6, max: 1e6, noNaN: true }), fc.integer({ min: 0, max: 20 })).map(([v, d]) => v.toFixed(d)),
      fc.tuple(fc.double({ noNaN: true, noDefaultInfinity: true }), fc.integer({ min: 0, max: 20 })).map(([v, d]) => v.toExponential(d)),
      fc.stringMatching(/^-?[0-9]{1,30}\.[0-9]{0,30}(e-?[0-9]{1,3})?$/),
    );
    fc.assert(
      fc.property(texts, (text) => {
        const parsed = parse(text);
        expect(parsed.ok).toBe(true);
        expect(parsed.value).toBe(Number(text));
      }),
      { numRuns: 2000 },
    );
  });

  it('marks plain integers, trims spaces and reads NaN and infinities', () => {
    expect(parse(' -12 ')).toEqual({ ok: true, value: -12, integer: true });
    expect(parse('+7')).toEqual({ ok: true, value: 7, integer: true });
    expect(parse('3.')).toEqual({ ok: true, value: 3, integer: false });
    expect(parse('.5')).toEqual({ ok: true, value: 0.5, integer: false });
    expect(parse('1e3')).toEqual({ ok: true, value: 1000, integer: false });
    expect(parse('NaN').ok).toBe(true);
    expect(parse('nan').value).toBeNaN();
    expect(parse('-Infinity').value).toBe(-Infinity);
    expect(parse('inf').value).toBe(Infinity);
  });

  it.each(['', ' ', 'abc', '1,2', '1e', '1e+', '--1', '.', '-', '0x10', '1_000', '12abc', '1.2.3', 'infinit', 'e5'])(
    'rejects %j',
    (text) => {
      expect(parse(text).ok).toBe(false);
    },
  );
});

describe('FastRowParser', () => {
  const plan = { names: ['t', 'x', 'y'], t: 0, x: 1, y: 2, extra: [] };
  function rows(text: string, capacity = 100, maxLineBytes = 40) {
    const bytes = Buffer.from(text, 'latin1');
    const parser = new FastRowParser(plan, maxLineBytes);
    const [t, x, y] = [new Float64Array(capacity), new Float64Array(capacity), new Float64Array(capacity)];
    const count = parser.parse(bytes, 0, bytes.length, 0, capacity, x, y, t, []);
    return { count, position: parser.position, t: Array.from(t.subarray(0, count)), x: Array.from(x.subarray(0, count)), y: Array.from(y.subarray(0, count)) };
  }

  it('takes whole rows of plain numbers in one pass, with the doubles Number() gives', () => {
    // Reference: ECMAScript Number(), as above.
    fc.assert(
      fc.property(fc.array(fc.tuple(fc.integer({ min: -1e6, max: 1e6 }), fc.double({ min: -1e3, max: 1e3, noNaN: true }), fc.integer({ min: 0, max: 9 }), fc.boolean()), { minLength: 1, maxLength: 50 }), (values) => {
        // Powers of ten within ±22 (beyond them the row goes to the general parser, below).
        const texts = values.map(([, d]) => (Math.abs(d) < 1e-6 ? 0 : d)).map((d, k) => [String(values[k]![0]), d.toFixed(values[k]![2]), d.toExponential(values[k]![2])]);
        const text = texts.map(([a, b, c], k) => `${a},${b},${c}${values[k]![3] ? '\r\n' : '\n'}`).join('');
        const got = rows(text, 100, 65_536);
        expect(got.count).toBe(values.length);
        expect(got.position).toBe(text.length);
        expect(got.t).toEqual(texts.map(([a]) => Number(a)));
        expect(got.x.every((v, k) => Object.is(v, Number(texts[k]![1])))).toBe(true);
        expect(got.y.every((v, k) => Object.is(v, Number(texts[k]![2])))).toBe(true);
      }),
      { numRuns: 500 },
    );
  });

  it.each([
    ['a comment', '# note\n'],
    ['a blank line', '\n'],
    ['spaces', ' 1,2,3\n'],
    ['NaN', '1,NaN,3\n'],
    ['an empty field', '1,,3\n'],
    ['too few columns', '1,2\n'],
    ['too many columns', '1,2,3,4\n'],
    ['a mantissa of 2^53 or more', '1,9007199254740993,3\n'],
    ['a power of ten beyond 22', '1,1e23,3\n'],
    ['a lone CR', '1,2,3\r4\n'],
    ['a line without its newline', '1,2,3'],
    ['a line over the limit', `1,2,${'1'.repeat(40)}\n`],
  ])('stops before %s and leaves it to the row parser', (_, rest) => {
    const got = rows(`1,2,3\n${rest}4,5,6\n`);
    expect(got.count).toBe(1);
    expect(got.position).toBe(6);
  });

  it('fills no more than the capacity', () => {
    expect(rows('1,2,3\n4,5,6\n7,8,9\n', 2).count).toBe(2);
  });
});
