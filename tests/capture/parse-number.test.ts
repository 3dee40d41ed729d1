import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { createParsedNumber, parseNumberBytes } from '../../src/io/capture/parse-number.js';

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
