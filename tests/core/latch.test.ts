// Position at trigger edges: edges at known sub-sample times on known motions must come out within the stated
// bound. Check values: the error of linear interpolation between x0 and x1 = x0 + h is
// −(x − x0)(x1 − x)/2 · f''(ξ) for some ξ in [x0, x1] (Lagrange remainder; Burden & Faires, Numerical Analysis,
// 9th ed., Theorem 3.3; memory: recalled, verify the theorem number), i.e. exactly f(1−f)/2 · a · T² for constant acceleration a.
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { AlarmBit, createEdgeLatch, type EdgePosition } from '../../src/core/index.js';

const RATE_HZ = 100_000;
const T = 1 / RATE_HZ;

/** Samples of a motion p(t), v(t) at t = i·T, i = 0..n−1. */
function sampled(n: number, position: (t: number) => number, velocity: (t: number) => number) {
  const positionM = new Float64Array(n);
  const velocityMS = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    positionM[i] = position(i * T);
    velocityMS[i] = velocity(i * T);
  }
  return { positionM, velocityMS, flags: new Uint8Array(n) };
}

/** Runs the latch over the samples cut into blocks at `cuts`, with every edge announced before its block. */
function latchAll(samples: ReturnType<typeof sampled>, edges: readonly number[], cuts: readonly number[] = []): EdgePosition[] {
  const latch = createEdgeLatch();
  const out: EdgePosition[] = [];
  const n = samples.positionM.length;
  const bounds = [...new Set([0, ...cuts.filter((c) => c > 0 && c < n), n])].sort((a, b) => a - b);
  let announced = 0;
  const sorted = [...edges].sort((a, b) => a - b);
  for (let b = 0; b + 1 < bounds.length; b++) {
    const [start, end] = [bounds[b]!, bounds[b + 1]!];
    while (announced < sorted.length && Math.ceil(sorted[announced]!) < end) latch.addEdge(sorted[announced++]!, 0, true);
    latch.process(
      samples.positionM.subarray(start, end),
      samples.velocityMS.subarray(start, end),
      samples.flags.subarray(start, end),
      end - start,
      start,
      out,
    );
  }
  latch.flush(out);
  return out;
}

const N = 400;
/** Edge times strictly inside the record, away from its ends (so both neighbours' second differences exist). */
const edgeTimes = fc.array(
  fc.tuple(fc.integer({ min: 3, max: N - 3 }), fc.double({ min: 0, max: 1, minExcluded: true, noNaN: true })).map(([k, f]) => k - 1 + f),
  { minLength: 1, maxLength: 8 },
);
const cutsArbitrary = fc.array(fc.integer({ min: 1, max: N - 1 }), { maxLength: 6 });

function expectWithinBound(results: readonly EdgePosition[], truth: (t: number) => number): void {
  for (const result of results) {
    const error = Math.abs(result.positionM - truth(result.sampleTime * T));
    // Rounding of the doubles on top of the bound: positions of millimetres carry ~1e-19 m.
    expect(error, `edge at ${result.sampleTime}`).toBeLessThanOrEqual(result.uncertaintyM * (1 + 1e-9) + 1e-17);
  }
}

describe('edge latch', () => {
  it('constant acceleration: the error is f(1−f)/2·a·T² and lies within the bound', () => {
    const a = 3.7; // m/s², invented
    const position = (t: number) => 1e-3 + 0.02 * t + (a * t * t) / 2;
    const samples = sampled(N, position, (t) => 0.02 + a * t);
    const [result] = latchAll(samples, [100.25]);
    // f = 0.25 of the interval (100, 101]: the chord lies above the parabola by f(1−f)/2·a·T².
    const expectedError = ((0.25 * 0.75) / 2) * a * T * T;
    expect(result!.positionM - position(100.25 * T)).toBeCloseTo(expectedError, 18); // positions of 1 mm round at ~1e-19 m
    expect(result!.uncertaintyM).toBeGreaterThanOrEqual(expectedError);
    // The bound is that error with its margin, plus the timing term |Δp|·2^-16.
    const step = position(101 * T) - position(100 * T);
    expect(result!.uncertaintyM).toBeCloseTo(1.25 * expectedError + Math.abs(step) * 2 ** -16, 18);
  });

  it('any edges on motions of constant acceleration or jerk, any block split: within the bound', () => {
    fc.assert(
      fc.property(
        fc.double({ min: -50, max: 50, noNaN: true }),
        fc.double({ min: -1e6, max: 1e6, noNaN: true }),
        fc.double({ min: -1, max: 1, noNaN: true }),
        edgeTimes,
        cutsArbitrary,
        (a, jerk, v0, edges, cuts) => {
          const position = (t: number) => v0 * t + (a * t * t) / 2 + (jerk * t * t * t) / 6;
          const results = latchAll(sampled(N, position, (t) => v0 + a * t + (jerk * t * t) / 2), edges, cuts);
          expect(results).toHaveLength(edges.length);
          expectWithinBound(results, position);
        },
      ),
      { numRuns: 200 },
    );
  });

  it('sinusoidal motion up to 0.5 rad per sample (including its turning points): within the bound', () => {
    fc.assert(
      fc.property(
        fc.double({ min: 1e-3, max: 0.5, noNaN: true }),
        fc.double({ min: 1e-9, max: 1e-3, noNaN: true }),
        fc.double({ min: 0, max: 2 * Math.PI, noNaN: true }),
        edgeTimes,
        (radPerSample, amplitude, phase, edges) => {
          const omega = radPerSample * RATE_HZ;
          const position = (t: number) => amplitude * Math.sin(omega * t + phase);
          const results = latchAll(sampled(N, position, (t) => amplitude * omega * Math.cos(omega * t + phase)), edges);
          expectWithinBound(results, position);
        },
      ),
      { numRuns: 300 },
    );
  });

  it('a turning point of a sinusoid midway between two samples, 0.5 rad per sample: within the bound (needs its margin)', () => {
    // There the acceleration peaks between the samples, above what the second differences around it show:
    // cos(ωT/2)·sinc-like factors make them (ωT)²/8 + (ωT)²/12 ≈ 5 % low at ωT = 0.5, which the margin covers.
    const omega = 0.5 * RATE_HZ;
    const peak = 99.5 * T;
    const position = (t: number) => 1e-6 * Math.cos(omega * (t - peak));
    const samples = sampled(N, position, (t) => -1e-6 * omega * Math.sin(omega * (t - peak)));
    const [result] = latchAll(samples, [99.5]);
    const error = Math.abs(result!.positionM - position(peak));
    expect(error).toBeLessThanOrEqual(result!.uncertaintyM);
    expect(error).toBeGreaterThan(result!.uncertaintyM / 1.25);
  });

  it('edge times quantised to 2^-16 of a period (as the wire format sends them): within the bound of the true time', () => {
    fc.assert(
      fc.property(fc.double({ min: -2, max: 2, noNaN: true }), edgeTimes, (velocity, trueTimes) => {
        const position = (t: number) => velocity * t;
        const samples = sampled(N, position, () => velocity);
        // A firmware truncates the lead: the sent time is up to one unit later than the true one.
        const sent = trueTimes.map((t) => {
          const k = Math.ceil(t);
          return k - Math.floor((k - t) * 65536) / 65536;
        });
        const results = latchAll(samples, sent);
        const order = [...trueTimes].sort((x, y) => x - y);
        results.forEach((result, i) => {
          expect(Math.abs(result.positionM - position(order[i]! * T))).toBeLessThanOrEqual(result.uncertaintyM * (1 + 1e-9) + 1e-17);
        });
      }),
      { numRuns: 200 },
    );
  });

  it('the same results for any split of the samples into blocks', () => {
    fc.assert(
      fc.property(edgeTimes, cutsArbitrary, (edges, cuts) => {
        const samples = sampled(N, (t) => Math.sin(2e4 * t) * 1e-6, (t) => Math.cos(2e4 * t) * 2e-2);
        expect(latchAll(samples, edges, cuts)).toEqual(latchAll(samples, edges));
      }),
      { numRuns: 100 },
    );
  });

  it('after a gap: steps back from the first sample along the next step, the whole correction as its bound', () => {
    const velocity = 0.01;
    const samples = sampled(20, (t) => velocity * t, () => velocity);
    samples.flags[10] = AlarmBit.inputGap | AlarmBit.countLost;
    const latch = createEdgeLatch();
    const out: EdgePosition[] = [];
    latch.process(samples.positionM.subarray(0, 5), samples.velocityMS.subarray(0, 5), samples.flags.subarray(0, 5), 5, 0, out);
    // Samples 5..9 lost; an edge at 9.5 lies between a lost sample and sample 10; one at 7.5 inside the gap.
    latch.addEdge(9.5, 0, true);
    latch.addEdge(7.5, 1, false);
    latch.process(samples.positionM.subarray(10), samples.velocityMS.subarray(10), samples.flags.subarray(10), 10, 10, out);
    expect(out.map((e) => e.sampleTime)).toEqual([7.5, 9.5]);
    expect(out[0]).toMatchObject({ line: 1, rising: false, positionM: NaN, uncertaintyM: NaN });
    expect(out[1]!.positionM).toBeCloseTo(velocity * 9.5 * T, 18);
    expect(out[1]!.uncertaintyM).toBeCloseTo(0.5 * velocity * T, 18);
    expect(out[1]!.flags).toBe(AlarmBit.inputGap | AlarmBit.countLost);
  });

  it('waits for the sample after the edge, and flush ends the wait', () => {
    const samples = sampled(10, (t) => t, () => 1);
    const latch = createEdgeLatch();
    const out: EdgePosition[] = [];
    latch.addEdge(7.5, 0, true);
    latch.process(samples.positionM.subarray(0, 9), samples.velocityMS.subarray(0, 9), samples.flags.subarray(0, 9), 9, 0, out);
    // Sample 8 follows the edge; sample 9, for the second difference after it, has not come.
    expect(out).toHaveLength(0);
    expect(latch.pending).toBe(1);
    latch.flush(out);
    expect(out[0]!.positionM).toBeCloseTo(7.5 * T, 15);
    expect(latch.pending).toBe(0);
  });

  it('rejects a bad time resolution and a bad edge time, naming them', () => {
    expect(() => createEdgeLatch({ timeResolutionSamples: 0 })).toThrow('timeResolutionSamples must be a number in (0, 1] (got 0)');
    expect(() => createEdgeLatch().addEdge(Number.NaN, 0, true)).toThrow('sampleTime must be a finite number above -1 (got NaN)');
  });
});
