// Positioning accuracy of an axis (ISO 230-2:2014 quantities; clause numbers recalled, see src/core/positioning.ts):
// a worked example computed by hand from the standard's formulas on invented deviations, dwell detection and the
// assignment of stops to the bidirectional cycle, and properties (shifts, symmetric data).
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import {
  assignTargetRun,
  createStopDetector,
  PositioningRunError,
  positioningStatistics,
  type Stop,
} from '../../src/core/index.js';

const um = (values: number[]) => Float64Array.from(values, (v) => v * 1e-6);

describe('positioningStatistics', () => {
  it('matches a worked example computed by hand from the formulas of ISO 230-2:2014 (invented data)', () => {
    // Invented deviations (µm), 3 targets, 5 cycles per direction. Hand-worked from the definitions (ISO 230-2:2014
    // clause 3, recalled): x̄ = mean, s with n − 1, B = x̄↑ − x̄↓, R↑ = 4s↑, R = max(2s↑ + 2s↓ + |B|, R↑, R↓),
    // E = range of the means, M = range of x̄ = (x̄↑ + x̄↓)/2, A = range of x̄ ± 2s.
    //   target 1: ↑ 1 2 3 2 2  x̄↑ = 2,  s↑ = √0.5;   ↓ −1 0 −1 0 −3  x̄↓ = −1, s↓ = √1.5;  B = 3
    //   target 2: ↑ 4 4 4 4 4  x̄↑ = 4,  s↑ = 0;      ↓ 2 3 1 2 2     x̄↓ = 2,  s↓ = √0.5;  B = 2
    //   target 3: ↑ 0 1 −1 2 −2 x̄↑ = 0, s↑ = √2.5;   ↓ −3 ×5        x̄↓ = −3, s↓ = 0;     B = 3
    // R_1 = 2√0.5 + 2√1.5 + 3 = 6.863703; R_2 = 2√0.5 + 2 = 3.414214; R_3 = max(2√2.5 + 3, 4√2.5) = 6.324555.
    // Axis: B = 3, B̄ = 8/3, R↑ = 4√2.5 = 6.324555, R↓ = 4√1.5 = 4.898979, R = 6.863703, E↑ = 4, E↓ = 5, E = 7,
    // M = 3 − (−1.5) = 4.5, A↑ = 4 − (−2√2.5) = 7.162278, A↓ = (2 + 2√0.5) − (−1 − 2√1.5) = 6.863703,
    // A = 4 − (−1 − 2√1.5) = 7.449490.
    const stats = positioningStatistics(
      [0, 0.1, 0.2],
      [um([1, 2, 3, 2, 2]), um([4, 4, 4, 4, 4]), um([0, 1, -1, 2, -2])],
      [um([-1, 0, -1, 0, -3]), um([2, 3, 1, 2, 2]), um([-3, -3, -3, -3, -3])],
    );
    const close = (metres: number, micrometres: number) => expect(Math.abs(metres * 1e6 - micrometres)).toBeLessThan(1e-6);
    close(stats.targets[0]!.meanUpM, 2);
    close(stats.targets[0]!.meanDownM, -1);
    close(stats.targets[0]!.meanM, 0.5);
    close(stats.targets[0]!.reversalM, 3);
    close(stats.targets[0]!.sUpM, Math.sqrt(0.5));
    close(stats.targets[0]!.sDownM, Math.sqrt(1.5));
    close(stats.targets[0]!.repeatabilityM, 6.863703);
    close(stats.targets[1]!.repeatabilityM, 3.414214);
    close(stats.targets[2]!.repeatabilityM, 6.324555);
    close(stats.reversalM, 3);
    close(stats.meanReversalM, 8 / 3);
    close(stats.repeatabilityUpM, 6.324555);
    close(stats.repeatabilityDownM, 4.898979);
    close(stats.repeatabilityM, 6.863703);
    close(stats.systematicUpM, 4);
    close(stats.systematicDownM, 5);
    close(stats.systematicM, 7);
    close(stats.meanDeviationRangeM, 4.5);
    close(stats.accuracyUpM, 7.162278);
    close(stats.accuracyDownM, 6.863703);
    close(stats.accuracyM, 7.44949);
  });

  it('moves with a common offset in the means only, and a run without spread or reversal has R = 0 and A = E', () => {
    const deviation = fc.double({ min: -50e-6, max: 50e-6, noNaN: true });
    fc.assert(
      fc.property(
        fc.array(fc.tuple(fc.array(deviation, { minLength: 3, maxLength: 3 }), fc.array(deviation, { minLength: 3, maxLength: 3 })), { minLength: 2, maxLength: 6 }),
        fc.double({ min: -1e-3, max: 1e-3, noNaN: true }),
        (rows, shift) => {
          const targets = rows.map((_, k) => k * 0.05);
          const up = rows.map(([u]) => Float64Array.from(u));
          const down = rows.map(([, d]) => Float64Array.from(d));
          const a = positioningStatistics(targets, up, down);
          const b = positioningStatistics(targets, up.map((v) => v.map((x) => x + shift)), down.map((v) => v.map((x) => x + shift)));
          // Ranges, reversal values and repeatabilities do not see a common offset.
          for (const key of ['reversalM', 'meanReversalM', 'repeatabilityM', 'systematicM', 'meanDeviationRangeM', 'accuracyM'] as const) {
            expect(Math.abs(a[key] - b[key])).toBeLessThan(1e-12);
          }
          expect(a.accuracyM).toBeGreaterThanOrEqual(a.systematicM - 1e-15);
          expect(a.repeatabilityM).toBeGreaterThanOrEqual(a.reversalM - 1e-15);
        },
      ),
    );
    const flat = positioningStatistics([0, 1], [um([1, 1]), um([3, 3])], [um([1, 1]), um([3, 3])]);
    expect(flat.repeatabilityM).toBe(0);
    expect(flat.reversalM).toBe(0);
    expect(flat.accuracyM).toBeCloseTo(flat.systematicM, 15);
  });
});

/** Invented bidirectional run: a position record (m) stepping through targets with overruns, dwelling at each target. */
function targetRun(targetsM: number[], cycles: number, deviation: (target: number, direction: 1 | -1, cycle: number) => number, options: { skip?: number } = {}) {
  const rateHz = 100;
  const samples: number[] = [];
  let x = targetsM[0]! - 0.002; // start below the first target, at rest
  const moveTo = (to: number) => {
    const steps = 20;
    const from = x;
    for (let s = 1; s <= steps; s++) samples.push(from + ((to - from) * s) / steps);
    x = to;
  };
  const dwell = (seconds: number) => {
    for (let s = 0; s < seconds * rateHz; s++) samples.push(x + 1e-8 * Math.sin(s)); // 10 nm of vibration
  };
  dwell(1);
  let stop = 0;
  for (let j = 0; j < cycles; j++) {
    targetsM.forEach((t, i) => {
      moveTo(t + deviation(i, 1, j));
      if (stop++ !== options.skip) dwell(1);
    });
    moveTo(targetsM[targetsM.length - 1]! + 0.002); // overrun, then approach from above
    for (let i = targetsM.length - 1; i >= 0; i--) {
      moveTo(targetsM[i]! + deviation(i, -1, j));
      if (stop++ !== options.skip) dwell(1);
    }
    moveTo(targetsM[0]! - 0.002);
  }
  dwell(0.5);
  return { rateHz, positionM: Float64Array.from(samples) };
}

function detect(positionM: Float64Array, rateHz: number, chunk: number): Stop[] {
  const detector = createStopDetector({ rateHz, bandHalfWidthM: 0.5e-6, minDwellS: 0.5 });
  const stops: Stop[] = [];
  for (let at = 0; at < positionM.length; at += chunk) detector.process(positionM.subarray(at, at + chunk), Math.min(chunk, positionM.length - at), stops);
  detector.finish(stops);
  return stops;
}

describe('stop detection and the target run', () => {
  const targets = [0, 0.025, 0.05, 0.075];
  const deviation = (i: number, d: 1 | -1, j: number) => (3 * i + (d === 1 ? 2 : -2) + 0.5 * j) * 1e-6;

  it('finds every stop with its approach, whatever the block split, and recovers the deviations', () => {
    fc.assert(
      fc.property(fc.integer({ min: 1, max: 5000 }), (chunk) => {
        const { rateHz, positionM } = targetRun(targets, 2, deviation);
        const stops = detect(positionM, rateHz, chunk);
        // 2 cycles × 4 targets × 2 directions, plus the rest at the start (approach 0) and at the end.
        expect(stops.length).toBe(18);
        expect(stops[0]!.approach).toBe(0);
        const run = assignTargetRun(stops, rateHz, { targetsM: targets, cycles: 2, datumOffsetM: 0 });
        for (let i = 0; i < 4; i++) {
          for (let j = 0; j < 2; j++) {
            // The dwell's 10 nm sine averages to within 1 nm over a second.
            expect(Math.abs(run.up[i]![j]! - deviation(i, 1, j))).toBeLessThan(1e-9);
            expect(Math.abs(run.down[i]![j]! - deviation(i, -1, j))).toBeLessThan(1e-9);
          }
        }
        expect(run.ignored.length).toBe(2);
      }),
      { numRuns: 20 },
    );
  });

  it('puts the first stop on the first target by default', () => {
    const { rateHz, positionM } = targetRun(targets, 2, deviation);
    const run = assignTargetRun(detect(positionM, rateHz, 4096), rateHz, { targetsM: targets, cycles: 2 });
    expect(run.up[0]![0]).toBeCloseTo(0, 12);
    expect(run.datumOffsetM).toBeCloseTo(-deviation(0, 1, 0), 9);
  });

  it('names a missing stop: target, direction and cycle', () => {
    const { rateHz, positionM } = targetRun(targets, 2, deviation, { skip: 5 }); // stop 6: target 3, ↓, cycle 1
    const stops = detect(positionM, rateHz, 4096);
    expect(() => assignTargetRun(stops, rateHz, { targetsM: targets, cycles: 2, datumOffsetM: 0 })).toThrow(PositioningRunError);
    expect(() => assignTargetRun(stops, rateHz, { targetsM: targets, cycles: 2, datumOffsetM: 0 })).toThrow(
      /missing stop: expected target 3 \(50\.00000 mm\) ↓ \(negative direction\) of cycle 1, but the next stop at [0-9.]+–[0-9.]+ s reads 25\.00\d+ mm, at target 2/,
    );
    const complete = detect(targetRun(targets, 2, deviation).positionM, rateHz, 4096);
    expect(() => assignTargetRun(complete, rateHz, { targetsM: targets, cycles: 3, datumOffsetM: 0 })).toThrow(
      /missing stop: expected target 1 \(0\.000000 mm\) ↑ \(positive direction\) of cycle 3, but the record ends after 16 of 24 stops/,
    );
  });
});

describe('createStopDetector', () => {
  it('keeps to its stated criteria: long enough, within the band, ended by a non-finite sample', () => {
    const detector = createStopDetector({ rateHz: 10, bandHalfWidthM: 1e-6, minDwellS: 1 });
    const stops: Stop[] = [];
    // 9 samples still (0.9 s: too short), a step, 12 samples within a 2 µm band, NaN, 12 samples still.
    const x = [...Array(9).fill(0), ...Array.from({ length: 12 }, (_, k) => 1e-3 + (k % 2) * 1.9e-6), NaN, ...Array(12).fill(2e-3)];
    detector.process(x, x.length, stops);
    detector.finish(stops);
    expect(stops.map((s) => [s.firstIndex, s.lastIndex, s.approach])).toEqual([
      [9, 20, 1],
      [22, 33, 0],
    ]);
    expect(stops[0]!.meanM).toBeCloseTo(1e-3 + 0.95e-6, 15);
    // A band of 2.1 µm is over the limit: the stretch breaks into runs too short to count.
    const wide = createStopDetector({ rateHz: 10, bandHalfWidthM: 1e-6, minDwellS: 1 });
    const none: Stop[] = [];
    const zigzag = Array.from({ length: 40 }, (_, k) => (k % 2) * 2.1e-6);
    wide.process(zigzag, zigzag.length, none);
    wide.finish(none);
    expect(none).toEqual([]);
    expect(() => createStopDetector({ rateHz: 10, bandHalfWidthM: 0, minDwellS: 1 })).toThrow(/bandHalfWidthM must be a positive finite number \(got 0\)/);
  });
});
