// The two-pass fit with its first pass over a part of the samples (endPass(true)): the result is the plain
// two-pass fit's over every sample, bit for bit, whatever the part: when the provisional gate keeps the same
// samples (checked on the second pass), after a third pass when it might not, and the failures of the whole.
// Captures are invented: an ellipse with noise, beams blocked to drawn radii (also near the gate's bounds),
// glitches, standing still with motion the part misses, too little motion.
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { createQuadratureSynthesizer, createTwoPassFit, spreadWindows, type EllipseAccumulator, type EllipseFitResult } from '../../src/core/index.js';
import { createWasmEllipseAccumulator } from '../../src/accel/index.js';
import '../support/property-seed.js';

const ellipse = { offsetX: 120, offsetY: -80, amplitudeX: 9000, amplitudeY: 8200, phaseErrorRad: 0.07 };
const N = 40_000;

const captures = fc
  .record({
    fringes: fc.oneof(fc.constant(0.3), fc.double({ min: 0.5, max: 30, noNaN: true })),
    movingFrom: fc.integer({ min: 0, max: N - 1 }),
    movingFor: fc.oneof(fc.constant(N), fc.integer({ min: 200, max: N })),
    blocked: fc.array(fc.record({ at: fc.integer({ min: 0, max: N - 1 }), length: fc.integer({ min: 1, max: 4000 }), radius: fc.oneof(fc.constantFrom(0.3, 0.5, 0.49, 0.51, 1.5), fc.double({ min: 0, max: 2, noNaN: true })) }), { maxLength: 3 }),
    glitches: fc.array(fc.tuple(fc.integer({ min: 0, max: N - 1 }), fc.constantFrom(Number.NaN, 4e4, -4e4)), { maxLength: 4 }),
    seed: fc.integer({ min: 1, max: 1000 }),
  })
  .map(({ fringes, movingFrom, movingFor, blocked, glitches, seed }) => {
    const phase = Float64Array.from({ length: N }, (_, i) => (2 * Math.PI * fringes * Math.min(1, Math.max(0, i - movingFrom) / movingFor)));
    const x = new Float64Array(N);
    const y = new Float64Array(N);
    createQuadratureSynthesizer({ ellipse, noiseRms: 0.003 * 9000, seed }).process(phase, x, y, N);
    for (const { at, length, radius } of blocked) {
      for (let i = at; i < Math.min(N, at + length); i++) {
        x[i] = ellipse.offsetX + (x[i]! - ellipse.offsetX) * radius;
        y[i] = ellipse.offsetY + (y[i]! - ellipse.offsetY) * radius;
      }
    }
    for (const [at, value] of glitches) x[at] = value;
    for (let i = 0; i < N; i++) [x[i], y[i]] = [Math.round(x[i]!), Math.round(y[i]!)];
    return { x, y };
  });

function feed(fit: ReturnType<typeof createTwoPassFit>, x: Float64Array, y: Float64Array, windows: ReadonlyArray<readonly [number, number]>): void {
  for (const [start, count] of windows) {
    for (let at = start; at < start + count; at += 4096) {
      const end = Math.min(start + count, at + 4096);
      fit.add(x.subarray(at, end), y.subarray(at, end), end - at);
    }
  }
}

/**
 * The plain two-pass fit over every sample, and the fit with a spread part first (its sums in `createAccumulator`'s,
 * default the core's); and how many passes over every sample it made.
 */
function both(x: Float64Array, y: Float64Array, samples: number, createAccumulator?: () => EllipseAccumulator): { plain: EllipseFitResult; withPart: EllipseFitResult; passes: number } {
  const all = [[0, N]] as const;
  const plainFit = createTwoPassFit();
  let plain: EllipseFitResult | null = null;
  while (plain === null) {
    feed(plainFit, x, y, all);
    plain = plainFit.endPass();
  }
  const fit = createTwoPassFit(createAccumulator === undefined ? {} : { createAccumulator });
  feed(fit, x, y, spreadWindows(N, samples)!);
  expect(fit.endPass(true)).toBeNull();
  let withPart: EllipseFitResult | null = null;
  let passes = 0;
  while (withPart === null) {
    feed(fit, x, y, all);
    passes++;
    withPart = fit.endPass();
  }
  return { plain, withPart, passes };
}

describe('two-pass fit with a first pass over a part', () => {
  it('gives the plain two-pass fit over every sample, bit for bit, for any capture', () => {
    fc.assert(
      fc.property(captures, fc.constantFrom(640, 2048, 8192), ({ x, y }, samples) => {
        const { plain, withPart, passes } = both(x, y, samples);
        expect(withPart).toEqual(plain);
        expect(passes).toBeLessThanOrEqual(3);
      }),
      { numRuns: 60 },
    );
  });

  it('gives it too with the accumulator of src/accel (its second pass sums for both fits at once)', () => {
    fc.assert(
      fc.property(captures, fc.constantFrom(640, 2048, 8192), ({ x, y }, samples) => {
        const { plain, withPart } = both(x, y, samples, () => createWasmEllipseAccumulator()!);
        expect(withPart).toEqual(plain);
      }),
      { numRuns: 30 },
    );
  });

  it('reads every sample once for a clean capture, and again when the part saw only standing still', () => {
    const phase = (moving: (i: number) => number) => Float64Array.from({ length: N }, (_, i) => moving(i));
    const make = (p: Float64Array) => {
      const x = new Float64Array(N), y = new Float64Array(N);
      createQuadratureSynthesizer({ ellipse, noiseRms: 0.003 * 9000, seed: 5 }).process(p, x, y, N);
      return { x, y };
    };
    const steady = make(phase((i) => (20 * Math.PI * i) / N));
    const clean = both(steady.x, steady.y, 2048);
    expect(clean.plain.ok).toBe(true);
    expect(clean.passes).toBe(1);
    // Three fringes between two of the part's windows, standing still elsewhere: the part's gate is an ellipse of
    // the noise at one phase, and the second pass finds that the first over every sample sets another.
    const windows = spreadWindows(N, 2048)!;
    const [from, to] = [windows[20]![0] + windows[20]![1] + 5, windows[21]![0] - 5];
    const hidden = make(phase((i) => 6 * Math.PI * Math.min(1, Math.max(0, (i - from) / (to - from)))));
    const fallback = both(hidden.x, hidden.y, 2048);
    expect(fallback.plain.ok).toBe(true);
    expect(fallback.withPart).toEqual(fallback.plain);
    expect(fallback.passes).toBe(2);
    // A beam blocked to 0.45-0.55 of the radius for 2 % of the capture: samples across the gate's lower bound,
    // whose side may differ between the two gates however close they are.
    const half = make(phase((i) => (20 * Math.PI * i) / N));
    for (let i = N / 2; i < N / 2 + 800; i++) {
      const radius = 0.45 + (0.1 * (i - N / 2)) / 800;
      half.x[i] = ellipse.offsetX + (half.x[i]! - ellipse.offsetX) * radius;
      half.y[i] = ellipse.offsetY + (half.y[i]! - ellipse.offsetY) * radius;
    }
    const bounded = both(half.x, half.y, 2048);
    expect(bounded.plain.ok && bounded.plain.samples).toBeLessThan(N);
    expect(bounded.withPart).toEqual(bounded.plain);
    expect(bounded.passes).toBe(2);
  });
});
