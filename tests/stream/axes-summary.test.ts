// The axes runner's block summaries: their extremes (min and max of positions and velocities, least level, flags
// seen) are computed when first read after a block. Whenever they are read, and whether or not the blocks before
// were read, they are the block's own, as the plain loop over its outputs finds them (`if (x < min) min = x` from
// Infinity, NaN when nothing finite; the rule of the JavaScript axis kernels).
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { createAxesRunner, type AxisBlockSummary } from '../../src/stream/index.js';
import { axisOptions, frame, quadrature } from './signal.js';

function loopExtremes(summary: AxisBlockSummary) {
  const { positionM, velocityMS, level, flags } = summary.output;
  let pMin = Infinity, pMax = -Infinity, vMin = Infinity, vMax = -Infinity, lMin = Infinity, seen = 0;
  for (let i = 0; i < summary.length; i++) {
    if (positionM[i]! < pMin) pMin = positionM[i]!;
    if (positionM[i]! > pMax) pMax = positionM[i]!;
    if (velocityMS[i]! < vMin) vMin = velocityMS[i]!;
    if (velocityMS[i]! > vMax) vMax = velocityMS[i]!;
    if (level[i]! < lMin) lMin = level[i]!;
    seen |= flags[i]!;
  }
  const finite = (value: number) => (Number.isFinite(value) ? value : Number.NaN);
  return { positionMinM: finite(pMin), positionMaxM: finite(pMax), velocityMinMS: finite(vMin), velocityMaxMS: finite(vMax), levelMin: finite(lMin), flagsSeen: seen };
}

function extremesOf(summary: AxisBlockSummary) {
  const { positionMinM, positionMaxM, velocityMinMS, velocityMaxMS, levelMin, flagsSeen } = summary;
  return { positionMinM, positionMaxM, velocityMinMS, velocityMaxMS, levelMin, flagsSeen };
}

describe('axes runner block summaries', () => {
  it('give each block its own extremes whenever they are read, and whichever blocks were read before', () => {
    fc.assert(
      fc.property(
        fc.integer({ min: 1, max: 3 }),
        // Per block: its length (0 included, some longer than any before so that the kernels' memory grows), whether
        // its extremes are read, and whether a latest value is read first.
        fc.array(fc.tuple(fc.integer({ min: 0, max: 700 }), fc.boolean(), fc.boolean()), { minLength: 1, maxLength: 12 }),
        fc.double({ min: 0.05, max: 2.5, noNaN: true }),
        (axisCount, blocks, fringesPerHundred) => {
          const total = blocks.reduce((sum, [length]) => sum + length, 0);
          // Invented motions: constant speed, each axis its own; a stretch of clipped samples raises flags.
          const axes = Array.from({ length: axisCount }, (_, k) => {
            const phase = Float64Array.from({ length: total }, (_, i) => (2 * Math.PI * fringesPerHundred * (k + 1) * i) / 100);
            const { x, y } = quadrature(phase);
            for (let i = Math.floor(total / 3); i < Math.floor(total / 3) + 20 && i < total; i++) x[i] = 32767;
            return { x, y };
          });
          const lazy = createAxesRunner({ axes: axes.map(() => ({ ...axisOptions })) });
          const eager = createAxesRunner({ axes: axes.map(() => ({ ...axisOptions })) });
          let start = 0;
          for (const [length, read, latestFirst] of blocks) {
            const block = frame(axes, start, length);
            start += length;
            const summaries = lazy.process(block);
            const expected = eager.process(block).map((summary) => ({ ...loopExtremes(summary), positionM: summary.positionM }));
            if (!read) continue;
            summaries.forEach((summary, k) => {
              if (latestFirst) expect(Object.is(summary.positionM, expected[k]!.positionM)).toBe(true);
              const { positionM: _latest, ...extremes } = expected[k]!;
              expect(extremesOf(summary)).toEqual(extremes);
              // A second read gives the same.
              expect(extremesOf(summary)).toEqual(extremes);
            });
          }
        },
      ),
      { numRuns: 60 },
    );
  });

  it('are NaN and no flags after a reset and for an empty block', () => {
    const { x, y } = quadrature(Float64Array.from({ length: 300 }, (_, i) => i / 10));
    const runner = createAxesRunner({ axes: [{ ...axisOptions }] });
    const none = { positionMinM: NaN, positionMaxM: NaN, velocityMinMS: NaN, velocityMaxMS: NaN, levelMin: NaN, flagsSeen: 0 };
    extremesOf(runner.process(frame([{ x, y }], 0, 300))[0]!);
    runner.reset();
    expect(extremesOf(runner.summaries[0]!)).toEqual(none);
    expect(extremesOf(runner.process(frame([{ x, y }], 0, 300))[0]!).levelMin).toBeGreaterThan(0.5);
    expect(extremesOf(runner.process(frame([{ x, y }], 0, 0))[0]!)).toEqual(none);
  });
});

describe('axes runner views', () => {
  // Views of a block length are kept for the next block of the length before it (lengths alternate when a chunk
  // holds n or n + 1 frames); arrays grown for a longer block must not be written through views made before.
  it('give the positions of one long block for blocks of alternating and growing lengths, with harmonics and a model watch', () => {
    fc.assert(
      fc.property(fc.array(fc.integer({ min: 1, max: 400 }), { minLength: 2, maxLength: 10 }), fc.integer({ min: 0, max: 2 }), (lengths, pattern) => {
        const blocks = lengths.map((length, i) => (pattern === 0 ? length : pattern === 1 ? (i % 2 === 0 ? 100 : 100 + length) : 50 * (i + 1)));
        const total = blocks.reduce((a, b) => a + b, 0);
        const { x, y } = quadrature(Float64Array.from({ length: total }, (_, i) => 0.003 * i * i / total + 0.2 * i));
        const axis = { ...axisOptions, harmonics: { cos: [0, 0.01, 0.002], sin: [0, -0.004, 0.001] }, modelWatch: {}, blockCapacity: 2048 };
        const whole = createAxesRunner({ axes: [axis] }).process(frame([{ x, y }], 0, total))[0]!;
        const expected = Array.from(whole.output.positionM);
        const runner = createAxesRunner({ axes: [axis] });
        const positions: number[] = [];
        let start = 0;
        for (const length of blocks) {
          positions.push(...runner.process(frame([{ x, y }], start, length))[0]!.output.positionM);
          start += length;
        }
        expect(positions).toEqual(expected);
      }),
      { numRuns: 40 },
    );
  });
});
