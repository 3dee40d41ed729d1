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

  it('reads nothing on a periodic-error-free phase, and a masked sample leaves its window out', () => {
    const { measured } = capture(100_000, 0);
    const valid = new Uint8Array(measured.length).fill(1);
    // A wild sample, masked: were its window used, the estimate would read it.
    measured[1000] = measured[1000]! + 3;
    valid[1000] = 0;
    const estimator = createPhaseDomainEstimator();
    estimator.process(measured, valid, measured.length);
    expect(estimator.windows.used).toBeGreaterThan(50);
    expect(estimator.summary().peakToPeakRad).toBeLessThan(1e-3); // 0.05 nm at 633 nm, fold 2
    const unmasked = createPhaseDomainEstimator({ maxMisfitRad: 10 });
    unmasked.process(measured, new Uint8Array(measured.length).fill(1), measured.length);
    expect(unmasked.summary().peakToPeakRad).toBeGreaterThan(3e-3);
  });

  it('does not read a smooth wander it cannot follow as periodic error (windows of two fringes, misfit bound)', () => {
    // 25 fringes in 12 000 samples with two superposed swings (invented); no periodic error at all, so the truth is
    // zero. Fixed windows of 512 samples with a 0.05 rad bound on what the cubic leaves read 0.72 nm p-p here.
    const n = 12_000;
    const phase = new Float64Array(n);
    for (let i = 0; i < n; i++) {
      const t = i / n;
      phase[i] = 2 * Math.PI * 25 * (0.6 * t + 0.25 * Math.sin(2 * Math.PI * 3.3 * t) + 0.1 * Math.sin(2 * Math.PI * 7.1 * t + 1));
    }
    const estimator = createPhaseDomainEstimator();
    estimator.process(phase, new Uint8Array(n).fill(1), n);
    expect(estimator.windows.used).toBeGreaterThan(20);
    expect(estimator.summary().peakToPeakRad).toBeLessThan(2e-3); // 0.1 nm at 633 nm, fold 2
    const loose = createPhaseDomainEstimator({ maxMisfitRad: 0.05, windowSpanRad: 1e9, maxWindowSamples: 512 });
    loose.process(phase, new Uint8Array(n).fill(1), n);
    expect(loose.summary().peakToPeakRad).toBeGreaterThan(0.01); // the fixed windows' error this replaces
  });

  // The second case is a long run's unwrapped phase (10^7 rad), where Math.cos(kφ) of the reference itself is only
  // good to about k·ulp(φ) ≈ 4e-9 rad; the bound is set above that.
  it.each([
    [1e4, 1e-10],
    [1e7, 1e-7],
  ])('equals the least-squares fit of per-window cubics and shared harmonics that ml-matrix solves (phase offset %d rad, within %d rad)', (offsetRad, bound) => {
    // The estimator computes cos kφ, sin kφ by angle addition and projects window by window; the reference builds
    // the whole design matrix with Math.cos(kφ) directly (third-party doc: ml-matrix's solve, QR least squares).
    const size = 64;
    const windows = 6;
    const orders = 4;
    const { measured } = capture(size * windows, 0.02);
    // Faster motion than capture()'s so that short windows span the phase: 6 windows of 64 samples.
    for (let i = 0; i < measured.length; i++) measured[i] = measured[i]! * 40 + offsetRad;
    const estimator = createPhaseDomainEstimator({ maxWindowSamples: size, windowSpanRad: 1e9, orders, maxMisfitRad: 1e3 });
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
      expect(Math.abs(binned[b]! - e)).toBeLessThan(bound);
    }
  });

  it('on a wander no cubic follows, uses no window and reports how far the best one was (ml-matrix least squares)', () => {
    // A random walk of the phase (red, like the thermal drift of a resting interferometer; invented) in windows of
    // 512 samples that span far less than two fringes, so each is judged by what its cubic alone leaves beyond the
    // noise (second differences). Checked against ml-matrix's QR least squares of each window (third-party: solve).
    const random = createRandom(4);
    const size = 512;
    const windows = 6;
    const wander = new Float64Array(size * windows);
    for (let i = 1; i < wander.length; i++) wander[i] = wander[i - 1]! + 0.003 * random.gaussian();
    const estimator = createPhaseDomainEstimator({ maxWindowSamples: size });
    estimator.process(wander, new Uint8Array(wander.length).fill(1), wander.length);
    let smallest = Infinity;
    for (let w = 0; w < windows; w++) {
      const design = new Matrix(size, 4);
      const target = new Matrix(size, 1);
      let curvature = 0;
      for (let j = 0; j < size; j++) {
        const t = (2 * j) / (size - 1) - 1;
        for (let d = 0; d < 4; d++) design.set(j, d, t ** d);
        target.set(j, 0, wander[w * size + j]!);
        if (j >= 2) curvature += (wander[w * size + j]! - 2 * wander[w * size + j - 1]! + wander[w * size + j - 2]!) ** 2;
      }
      const residual = target.sub(design.mmul(solve(design, target)));
      smallest = Math.min(smallest, Math.sqrt(residual.norm() ** 2 / size - curvature / (6 * (size - 2))));
    }
    expect(estimator.windows.fitted).toBe(windows);
    expect(estimator.windows.used).toBe(0);
    expect(smallest).toBeGreaterThan(estimator.options.maxMisfitRad);
    expect(estimator.windows.smallestMisfitRad).toBeCloseTo(smallest, 8);
    expect(Number.isNaN(estimator.summary().peakToPeakRad)).toBe(true);
    estimator.reset();
    expect(estimator.windows).toEqual({ fitted: 0, used: 0, smallestMisfitRad: NaN });
  });

  it('gives a run the same result whatever windows came before it (the cubic is prepared again for a new window size)', () => {
    const { measured } = capture(60_000, 0.01);
    const valid = new Uint8Array(measured.length).fill(1);
    const fresh = createPhaseDomainEstimator();
    fresh.process(measured, valid, measured.length);
    // Windows of another stretch first (other sizes: the window ends where the phase has spanned two fringes), then
    // a reset and the same run as the fresh estimator's.
    const reused = createPhaseDomainEstimator();
    reused.process(measured.subarray(31_000, 37_000), valid, 6000);
    expect(reused.windows.fitted).toBeGreaterThan(3);
    reused.reset();
    reused.process(measured, valid, measured.length);
    expect(fresh.windows.used).toBeGreaterThan(20);
    expect(reused.summary()).toEqual(fresh.summary());
    expect(reused.binnedMeanRad()).toEqual(fresh.binnedMeanRad());
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
