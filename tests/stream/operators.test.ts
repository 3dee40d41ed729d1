// Marble tests of each stream operator: normal flow, source error, empty source, early unsubscribe, a malformed
// block, and the block-split property (same output for any split of the same samples).
// Check values: displacement per fringe λ/(N·n) with λ = 632.9908 nm, N = 2 (CIPM 2007, published; common
// practice); the fitted ellipse is the synthesised one (Heydemann 1981 model, published).
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { from, map, toArray, type Observable, type OperatorFunction } from 'rxjs';
import { lastValueFrom } from 'rxjs';
import { TestScheduler } from 'rxjs/testing';
import type { EllipseFitResult } from '../../src/core/index.js';
import {
  correctQuadrature,
  deinterleaveAxis,
  fitEllipse,
  trackPosition,
  type AxisBlock,
  type CorrectedBlock,
  type FrameBlock,
  type PositionBlock,
} from '../../src/stream/index.js';
import { axisBlocks, axisOptions, cuts, ellipse, frame, METRES_PER_FRINGE, quadrature, ramp, round } from './signal.js';

function scheduler(): TestScheduler {
  return new TestScheduler((actual, expected) => expect(actual).toEqual(expected));
}

// Three fringes over 600 samples in three blocks of 200: each block is one whole fringe.
const signal = quadrature(ramp(600, 3));
const [a, b, c] = axisBlocks(signal.x, signal.y, [200, 400]) as [AxisBlock, AxisBlock, AxisBlock];

interface Contract<In, Out, Summary> {
  readonly name: string;
  readonly operator: () => OperatorFunction<In, Out>;
  readonly inputs: readonly [In, In, In];
  readonly summarise: (out: Out) => Summary;
  readonly expected: readonly [Summary, Summary, Summary];
  readonly malformed: In;
  /** Inputs of the same samples split at the cut points, and a copy of everything emitted. */
  readonly split: (cutPoints: readonly number[]) => In[];
  readonly collect: (out: Out) => unknown;
  readonly length: number;
}

function contract<In, Out, Summary>(spec: Contract<In, Out, Summary>): void {
  describe(spec.name, () => {
    const values = { a: spec.inputs[0], b: spec.inputs[1], c: spec.inputs[2] };
    const expected = { a: spec.expected[0], b: spec.expected[1], c: spec.expected[2] };

    it('normal flow: one result per input block, in order, then completion', () => {
      scheduler().run(({ cold, expectObservable, expectSubscriptions }) => {
        const source = cold('a-b-c|', values);
        expectObservable(source.pipe(spec.operator(), map(spec.summarise))).toBe('a-b-c|', expected);
        expectSubscriptions(source.subscriptions).toBe('^----!');
      });
    });

    it('source error reaches the subscriber after the results before it', () => {
      scheduler().run(({ cold, expectObservable }) => {
        const failure = new Error('link down');
        expectObservable(cold('a-#', values, failure).pipe(spec.operator(), map(spec.summarise))).toBe('a-#', expected, failure);
      });
    });

    it('empty source completes with nothing', () => {
      scheduler().run(({ cold, expectObservable }) => {
        expectObservable(cold<In>('|').pipe(spec.operator())).toBe('|');
      });
    });

    it('early unsubscribe stops the source subscription', () => {
      scheduler().run(({ cold, expectObservable, expectSubscriptions }) => {
        const source = cold('a-b-c|', values);
        expectObservable(source.pipe(spec.operator(), map(spec.summarise)), '^-!').toBe('a-', expected);
        expectSubscriptions(source.subscriptions).toBe('^-!');
      });
    });

    it('a malformed block ends the stream with an error naming the field', () => {
      scheduler().run(({ cold, expectObservable }) => {
        const source = cold('a-m-c|', { a: spec.inputs[0], m: spec.malformed, c: spec.inputs[2] }) as Observable<In>;
        expectObservable(source.pipe(spec.operator(), map(spec.summarise))).toBe(
          'a-#',
          expected,
          expect.objectContaining({ message: expect.stringMatching(/^block\.\w+ must be/) }),
        );
      });
    });

    it('block-split property: the same output for any split of the same samples', async () => {
      const whole = await lastValueFrom(from(spec.split([])).pipe(spec.operator(), map(spec.collect), toArray()));
      await fc.assert(
        fc.asyncProperty(fc.array(fc.nat(), { maxLength: 12 }), async (raw) => {
          const parts = spec.split(cuts(raw, spec.length));
          const out = await lastValueFrom(from(parts).pipe(spec.operator(), map(spec.collect), toArray()));
          expect(flatten(out)).toEqual(flatten(whole));
        }),
        { numRuns: 40 },
      );
    });
  });
}

/** Concatenates collected per-block arrays, so splits compare sample by sample. */
function flatten(collected: unknown[]): unknown {
  if (collected.every((item) => Array.isArray(item))) return (collected as unknown[][]).flat();
  return collected;
}

const tooLong: AxisBlock = { x: new Float64Array(4), y: new Float64Array(4), length: 5 };

contract<AxisBlock, PositionBlock, { first: number; length: number; fringes: number; events: number }>({
  name: 'trackPosition',
  operator: () => trackPosition(axisOptions),
  inputs: [a, b, c],
  summarise: (out) => ({
    first: out.firstSampleIndex,
    length: out.length,
    fringes: round(out.positionM[out.length - 1]! / METRES_PER_FRINGE, 6),
    events: out.events.length,
  }),
  // Last sample of block k sits at (200k + 199)/200 fringes.
  expected: [
    { first: 0, length: 200, fringes: 0.995, events: 0 },
    { first: 200, length: 200, fringes: 1.995, events: 0 },
    { first: 400, length: 200, fringes: 2.995, events: 0 },
  ],
  malformed: tooLong,
  split: (cutPoints) => axisBlocks(signal.x, signal.y, cutPoints),
  collect: (out) => Array.from(out.positionM, (p, i) => [p, out.velocityMS[i], out.level[i], out.flags[i]]),
  length: 600,
});

contract<AxisBlock, CorrectedBlock, { length: number; radiusError: number; phaseRad: number }>({
  name: 'correctQuadrature',
  operator: () => correctQuadrature({ calibration: ellipse }),
  inputs: [a, b, c],
  summarise: (out) => {
    let worst = 0;
    for (let i = 0; i < out.length; i++) worst = Math.max(worst, Math.abs(Math.hypot(out.u[i]!, out.v[i]!) - 1));
    return { length: out.length, radiusError: round(worst, 9), phaseRad: round(Math.atan2(out.v[out.length - 1]!, out.u[out.length - 1]!), 9) };
  },
  // Corrected points lie on the unit circle; the last sample of each block is 1/200 fringe short of a turn.
  expected: [0, 1, 2].map(() => ({ length: 200, radiusError: 0, phaseRad: round(-2 * Math.PI / 200, 9) })) as never,
  malformed: tooLong,
  split: (cutPoints) => axisBlocks(signal.x, signal.y, cutPoints),
  collect: (out) => Array.from(out.u, (u, i) => [u, out.v[i]]),
  length: 600,
});

type FitSummary = { ok: boolean; offsetX: number; offsetY: number; amplitudeX: number; amplitudeY: number; phaseErrorRad: number };
contract<AxisBlock, EllipseFitResult, FitSummary>({
  name: 'fitEllipse',
  operator: () => fitEllipse({ everySamples: 200 }),
  inputs: [a, b, c],
  summarise: (out) =>
    out.ok
      ? {
          ok: true,
          offsetX: round(out.calibration.offsetX, 3),
          offsetY: round(out.calibration.offsetY, 3),
          amplitudeX: round(out.calibration.amplitudeX, 3),
          amplitudeY: round(out.calibration.amplitudeY, 3),
          phaseErrorRad: round(out.calibration.phaseErrorRad, 6),
        }
      : { ok: false, offsetX: NaN, offsetY: NaN, amplitudeX: NaN, amplitudeY: NaN, phaseErrorRad: NaN },
  // Noise-free samples of one whole fringe: the fit returns the synthesised ellipse.
  expected: [0, 1, 2].map(() => ({ ok: true, ...ellipse })) as never,
  malformed: tooLong,
  split: (cutPoints) => axisBlocks(signal.x, signal.y, cutPoints),
  // The accumulator sums each block's moments before adding them, so splits differ by rounding only
  // (about 1e-15 relative): compare to 1e-6 counts and 1e-12 rad.
  collect: (out) =>
    out.ok
      ? [round(out.calibration.offsetX, 6), round(out.calibration.offsetY, 6), round(out.calibration.amplitudeX, 6), round(out.calibration.amplitudeY, 6), round(out.calibration.phaseErrorRad, 12)]
      : out.reason,
  length: 600,
});

// Two axes in a frame: axis 1 is the signal, axis 0 its mirror image.
const mirrored = { x: signal.x.map((value) => -value), y: signal.y.map((value) => -value) };
const frames = [frame([mirrored, signal], 0, 200), frame([mirrored, signal], 200, 200), frame([mirrored, signal], 400, 200)] as const;
contract<FrameBlock, AxisBlock, { length: number; x0: number; y0: number; gap: number }>({
  name: 'deinterleaveAxis',
  operator: () => deinterleaveAxis({ axis: 1 }),
  inputs: frames,
  summarise: (out) => ({ length: out.length, x0: out.x[0]!, y0: out.y[0]!, gap: out.gapBefore ?? 0 }),
  expected: [0, 200, 400].map((at) => ({ length: 200, x0: Math.round(signal.x[at]!), y0: Math.round(signal.y[at]!), gap: 0 })) as never,
  malformed: { samples: new Int16Array(4), channelCount: 3, samplesPerFrame: 1 },
  split: (cutPoints) => {
    const ends = [...cutPoints, 600];
    return ends.map((end, k) => frame([mirrored, signal], k === 0 ? 0 : ends[k - 1]!, end - (k === 0 ? 0 : ends[k - 1]!)));
  },
  collect: (out) => Array.from(out.x.subarray(0, out.length), (x, i) => [x, out.y[i]]),
  length: 600,
});

describe('operator options', () => {
  it('rejects invalid options at the call, naming option, rule and value', () => {
    expect(() => trackPosition({ ...axisOptions, rateHz: 0 })).toThrow('rateHz must be a positive finite number (got 0)');
    expect(() => fitEllipse({ everySamples: 3 })).toThrow(/^everySamples must be an integer in 6\.\./);
    expect(() => deinterleaveAxis({ axis: 8 })).toThrow('axis must be an integer in 0..7 (got 8)');
  });

  it('deinterleaveAxis refuses a frame without the axis', async () => {
    const oneAxis = frame([signal], 0, 10);
    await expect(lastValueFrom(from([oneAxis]).pipe(deinterleaveAxis({ axis: 1 })))).rejects.toThrow('axis 1 needs channels 2 and 3 (frame has 2)');
  });

  it('deinterleaveAxis follows a channel layout: a pair after three outputs, and refuses an axis of three', async () => {
    // Layout [3, 2]: channels 0..2 are axis 0's outputs, 3 and 4 axis 1's x and y (docs/wire-format.md).
    const samples = Int16Array.from({ length: 10 }, (_, i) => i);
    const layoutFrame = { samples, channelCount: 5, samplesPerFrame: 2, axisOutputs: [3, 2] };
    const pair = await lastValueFrom(from([layoutFrame]).pipe(deinterleaveAxis({ axis: 1 }), map((block) => [Array.from(block.x.subarray(0, 2)), Array.from(block.y.subarray(0, 2))])));
    expect(pair).toEqual([[3, 8], [4, 9]]);
    await expect(lastValueFrom(from([layoutFrame]).pipe(deinterleaveAxis({ axis: 0 })))).rejects.toThrow('axis 0 has 3 detector outputs, not a pair');
  });

  it('trackPosition gives each subscriber its own pipeline, counting from zero', async () => {
    const track = from([a, b]).pipe(trackPosition(axisOptions), map((out) => out.firstSampleIndex), toArray());
    expect(await lastValueFrom(track)).toEqual([0, 200]);
    expect(await lastValueFrom(track)).toEqual([0, 200]);
  });

  it('trackPosition marks a gap before its block: input_gap flag, sample index advanced', async () => {
    const gapped: AxisBlock = { ...b, gapBefore: 50 };
    const out = await lastValueFrom(
      from([a, gapped]).pipe(trackPosition(axisOptions), map((block) => ({ first: block.firstSampleIndex, kinds: block.events.map((e) => `${e.kind}:${e.state}`) })), toArray()),
    );
    expect(out[1]!.first).toBe(250);
    expect(out[1]!.kinds).toContain('inputGap:raised');
  });
});
