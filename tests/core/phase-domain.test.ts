// The "after" periodic error in the phase domain, on slow irregular motion with reversals where no window holds
// several fringes of steady motion. Check value: the truth, known here because the signal is made from a known
// phase through the ghost-beam model of Wu & Deslattes (Appl. Opt. 37(28), 1998, published; docs/references.md) — the
// estimate must match the periodic error measured against the true phase. Motion, ghost and seed are invented.
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { Matrix, solve } from 'ml-matrix';
import '../support/property-seed.js';
import { createPhaseDomainEstimator, createRandom, createWindowDetrender, createPeriodicErrorAnalyzer } from '../../src/core/index.js';

/** Measured phase = true phase + g·sin(φ + 0.7) + 0.4 g·sin(2φ − 1.1) + 0.002 rad noise. */
function capture(samples: number, g: number) {
  const random = createRandom(9);
  const truth = new Float64Array(samples);
  const measured = new Float64Array(samples);
  for (let i = 0; i < samples; i++) {
    const t = i / samples;
    // Slow and irregular: about 350 samples per fringe at most, several reversals and stops.
    const p = 60 * Math.sin(2 * Math.PI * 2.1 * t) + 35 * Math.sin(2 * Math.PI * 5.3 * t + 1) + 20 * t;
    truth[i] = p;
    measured[i] = p + g * Math.sin(p + 0.7) + 0.4 * g * Math.sin(2 * p - 1.1) + 0.002 * random.gaussian();
  }
  return { truth, measured };
}

describe('phase-domain periodic error', () => {
  it('measures the periodic error on slow irregular motion, where the steady-window method finds nothing', () => {
    const g = 0.01;
    const { measured } = capture(200_000, g);
    const valid = new Uint8Array(measured.length).fill(1);
    const estimator = createPhaseDomainEstimator();
    estimator.process(measured, valid, measured.length);
    const summary = estimator.summary();
    expect(summary.firstHarmonicRad).toBeCloseTo(g, 3);
    expect(summary.secondHarmonicRad).toBeCloseTo(0.4 * g, 3);
    expect(summary.binCoverage).toBe(1);
    const steady = createPeriodicErrorAnalyzer();
    createWindowDetrender(steady).process(measured, valid, measured.length);
    expect(steady.summary().samples).toBe(0);
  });

  it('reads nothing on a periodic-error-free phase, and masked windows are left out', () => {
    const { measured } = capture(100_000, 0);
    const valid = new Uint8Array(measured.length).fill(1);
    valid[1000] = 0;
    const estimator = createPhaseDomainEstimator();
    estimator.process(measured, valid, measured.length);
    expect(estimator.summary().peakToPeakRad).toBeLessThan(1e-3); // 0.05 nm at 633 nm, fold 2
    expect(estimator.windows.used).toBe(Math.floor(100_000 / 512) - 1);
  });

  it('equals the least-squares fit of per-window cubics and shared harmonics that ml-matrix solves (within 1e-10 rad)', () => {
    // The estimator computes cos kφ, sin kφ by angle addition and projects window by window; the reference builds
    // the whole design matrix with Math.cos(kφ) directly (third-party doc: ml-matrix's solve, QR least squares).
    const size = 64;
    const windows = 6;
    const orders = 4;
    const { measured } = capture(size * windows, 0.02);
    // Faster motion than capture()'s so that short windows span the phase: 6 windows of 64 samples.
    for (let i = 0; i < measured.length; i++) measured[i] = measured[i]! * 40 + 1e4;
    const estimator = createPhaseDomainEstimator({ windowSamples: size, orders, maxResidualRad: 1e3 });
    estimator.process(measured, new Uint8Array(measured.length).fill(1), measured.length);
    expect(estimator.windows.used).toBe(windows);
    const columns = 4 * windows + 2 * orders;
    const design = new Matrix(size * windows, columns);
    const target = new Matrix(size * windows, 1);
    for (let w = 0; w < windows; w++) {
      for (let j = 0; j < size; j++) {
        const row = w * size + j;
        const t = (2 * j) / (size - 1) - 1;
        for (let d = 0; d < 4; d++) design.set(row, 4 * w + d, t ** d);
        const phase = measured[row]!;
        for (let k = 1; k <= orders; k++) {
          design.set(row, 4 * windows + 2 * k - 2, Math.cos(k * phase));
          design.set(row, 4 * windows + 2 * k - 1, Math.sin(k * phase));
        }
        target.set(row, 0, phase - measured[w * size]!);
      }
    }
    const x = solve(design, target);
    const binned = estimator.binnedMeanRad();
    for (let b = 0; b < binned.length; b++) {
      const centre = ((b + 0.5) / binned.length) * 2 * Math.PI;
      let e = 0;
      for (let k = 1; k <= orders; k++) e += x.get(4 * windows + 2 * k - 2, 0) * Math.cos(k * centre) + x.get(4 * windows + 2 * k - 1, 0) * Math.sin(k * centre);
      expect(Math.abs(binned[b]! - e)).toBeLessThan(1e-10);
    }
  });

  it('skip(n) gives the same result as n masked samples, for any blocks', () => {
    const { measured } = capture(40_000, 0.01);
    fc.assert(
      fc.property(fc.array(fc.tuple(fc.integer({ min: 1, max: 3000 }), fc.boolean()), { minLength: 1, maxLength: 30 }), (blocks) => {
        const masked = createPhaseDomainEstimator();
        const skipping = createPhaseDomainEstimator();
        const ones = new Uint8Array(measured.length).fill(1);
        const zeros = new Uint8Array(measured.length);
        let start = 0;
        for (const [length, skip] of blocks) {
          const n = Math.min(length, measured.length - start);
          const phase = measured.subarray(start, start + n);
          masked.process(phase, skip ? zeros : ones, n);
          if (skip) skipping.skip(n);
          else skipping.process(phase, ones, n);
          start += n;
        }
        expect(skipping.windows).toEqual(masked.windows);
        expect(skipping.summary()).toEqual(masked.summary());
        expect(Array.from(skipping.binnedMeanRad())).toEqual(Array.from(masked.binnedMeanRad()));
      }),
      { numRuns: 30 },
    );
  });
});
