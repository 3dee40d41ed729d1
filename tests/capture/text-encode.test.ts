// The byte writers must give exactly the text of the ECMAScript reference conversions (Number.prototype.toFixed,
// String(integer)), which the result and capture formats are documented by.
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { writeFixedAscii, writeIntegerAscii } from '../../src/io/capture/text-encode.js';

const bytes = Buffer.alloc(128);
const fixed = (value: number, decimals: number): string => bytes.toString('latin1', 0, writeFixedAscii(bytes, 0, value, decimals));
const integer = (value: number): string => bytes.toString('latin1', 0, writeIntegerAscii(bytes, 0, value));

describe('writeFixedAscii', () => {
  it.each([
    [0, 12],
    [-0, 3],
    [0.5, 0],
    [1.5, 0],
    [2.5, 0],
    [-1e-13, 12],
    [1.005, 2],
    [123.456, 2],
    [1e-7, 9],
    [4.35, 1],
    [1e21, 2],
    [-9007.5, 12],
  ])('writes %d with %d decimals as toFixed does', (value, decimals) => {
    expect(fixed(value, decimals)).toBe(value.toFixed(decimals));
  });

  it('matches toFixed for result-sized values (positions, times, velocities, levels)', () => {
    const decimals = fc.constantFrom(6, 9, 12);
    fc.assert(
      fc.property(fc.double({ min: -20, max: 20, noNaN: true }), decimals, (value, places) => {
        expect(fixed(value, places)).toBe(value.toFixed(places));
      }),
      { numRuns: 20_000 },
    );
  });

  it('matches toFixed near rounding ties and over a wide range', () => {
    const nearTie = fc
      .tuple(fc.integer({ min: -1e9, max: 1e9 }), fc.integer({ min: 0, max: 12 }), fc.integer({ min: -3, max: 3 }))
      .map(([units, places, nudge]) => [((units + 0.5) / 10 ** places) * (1 + nudge * Number.EPSILON), places] as const);
    const wide = fc.tuple(fc.double({ min: -1e7, max: 1e7, noNaN: true }), fc.integer({ min: 0, max: 15 }));
    fc.assert(
      fc.property(fc.oneof(nearTie, wide), ([value, places]) => {
        expect(fixed(value, places)).toBe(value.toFixed(places));
      }),
      { numRuns: 20_000 },
    );
  });
});

describe('writeIntegerAscii', () => {
  it('matches String() for safe integers', () => {
    fc.assert(
      fc.property(fc.oneof(fc.integer(), fc.maxSafeInteger(), fc.maxSafeInteger().map((v) => -v), fc.integer({ min: -20, max: 20 })), (value) => {
        expect(integer(value)).toBe(String(value === 0 ? 0 : value));
      }),
      { numRuns: 5000 },
    );
  });
});
