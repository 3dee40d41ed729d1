// Periodic-error analysis and motion profiles. Check values are constructed from their definitions: a known
// harmonic error must be measured back (amplitudes exact for a pure sinusoid; peak-to-peak of a sine is 2×).
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { createMotionProfile, createPeriodicErrorAnalyzer, createWindowDetrender } from '../../src/core/index.js';

describe('periodic error analyzer', () => {
  it('measures known first and second harmonics, peak-to-peak and RMS', () => {
    const n = 100_000;
    const phase = Float64Array.from({ length: n }, (_, i) => 0.0137 * i - 3);
    const error = phase.map((p) => 0.01 * Math.cos(p + 0.3) + 0.004 * Math.sin(2 * p));
    const analyzer = createPeriodicErrorAnalyzer();
    analyzer.add(phase, error, n);
    const summary = analyzer.summary();
    expect(summary.firstHarmonicRad).toBeCloseTo(0.01, 5);
    expect(summary.secondHarmonicRad).toBeCloseTo(0.004, 5);
    expect(summary.binCoverage).toBe(1);
    const single = createPeriodicErrorAnalyzer({ bins: 256 });
    single.add(phase, phase.map((p) => 0.02 * Math.sin(p)), n);
    expect(single.summary().peakToPeakRad).toBeCloseTo(0.04, 4);
    expect(single.summary().rmsRad).toBeCloseTo(0.02 / Math.SQRT2, 4);
  });

  it('the window detrender measures the fringe-rate error under accelerating motion, and only on steady stretches', () => {
    const n = 200_000;
    // Constant acceleration from 0.08 to 0.28 rad per sample (over 3 fringes per window), then a kink to constant velocity inside a window.
    const truth = new Float64Array(n);
    let step = 0.08;
    for (let i = 1; i < n; i++) {
      if (i < n / 2 + 128) step += 0.2 / (n / 2);
      truth[i] = truth[i - 1]! + step;
    }
    const measured = truth.map((p) => p + 0.01 * Math.sin(p) + 0.003 * Math.cos(2 * p));
    const analyzer = createPeriodicErrorAnalyzer();
    const detrender = createWindowDetrender(analyzer);
    const valid = new Uint8Array(n).fill(1);
    valid[150_000] = 0; // one window left out for a flagged sample
    detrender.process(measured, valid, n);
    const summary = analyzer.summary();
    expect(summary.firstHarmonicRad).toBeCloseTo(0.01, 3);
    expect(summary.secondHarmonicRad).toBeCloseTo(0.003, 3);
    expect(detrender.windows.fitted).toBe(Math.floor(n / 256) - 1); // the window with the flagged sample is not fitted
    expect(detrender.windows.used).toBe(detrender.windows.fitted); // a gentle kink is still smooth enough
    // A stage that stops dead at sample 1000: windows 0-2 are steady, window 3 holds the stop, the rest stand still.
    const crash = Float64Array.from({ length: 2048 }, (_, i) => 0.2 * Math.min(i, 1000));
    const crashDetrender = createWindowDetrender(createPeriodicErrorAnalyzer());
    crashDetrender.process(crash, new Uint8Array(2048).fill(1), 2048);
    expect(crashDetrender.windows).toEqual({ fitted: 8, used: 3 });
    const still = createPeriodicErrorAnalyzer();
    createWindowDetrender(still).process(new Float64Array(10_000).fill(1), new Uint8Array(10_000).fill(1), 10_000);
    expect(still.summary().samples).toBe(0); // no motion: nothing to measure
  });
});

describe('motion profiles', () => {
  it('trapezoidal moves reach the distance, reverse, and never exceed the speed limit', () => {
    fc.assert(
      fc.property(
        fc.double({ min: 1e-6, max: 1e-2, noNaN: true }),
        fc.double({ min: 1e-3, max: 0.1, noNaN: true }),
        fc.double({ min: 0.1, max: 10, noNaN: true }),
        (distanceM, maxVelocityMS, accelerationMS2) => {
          const rateHz = 1e5;
          const profile = createMotionProfile({ kind: 'trapezoid', distanceM, maxVelocityMS, accelerationMS2, dwellS: 0.001 }, rateHz);
          const n = 50_000;
          const position = new Float64Array(n);
          profile.process(0, position, n);
          let peak = 0;
          let top = 0;
          for (let i = 1; i < n; i++) {
            peak = Math.max(peak, Math.abs(position[i]! - position[i - 1]!) * rateHz);
            top = Math.max(top, position[i]!);
          }
          expect(peak).toBeLessThanOrEqual(profile.peakSpeedMS * (1 + 1e-9) + 1e-12);
          expect(profile.peakSpeedMS).toBeLessThanOrEqual(maxVelocityMS);
          expect(top).toBeLessThanOrEqual(distanceM * (1 + 1e-12));
          expect(position[0]).toBe(0);
        },
      ),
      { numRuns: 50 },
    );
  });

  it('blocks of any size give the same positions', () => {
    const profile = createMotionProfile({ kind: 'vibration', amplitudeM: 1e-6, frequencyHz: 50, driftVelocityMS: 1e-5 }, 1e4);
    const whole = new Float64Array(1000);
    profile.process(0, whole, 1000);
    const parts = new Float64Array(1000);
    profile.process(0, parts.subarray(0, 333), 333);
    profile.process(333, parts.subarray(333), 667);
    expect(parts).toEqual(whole);
    expect(profile.peakSpeedMS).toBeCloseTo(1e-6 * 2 * Math.PI * 50 + 1e-5, 15);
  });
});
