// The "after" periodic error in the phase domain, on slow irregular motion with reversals where no window holds
// several fringes of steady motion. Check value: the truth, known here because the signal is made from a known
// phase through the ghost-beam model of Wu & Deslattes (Appl. Opt. 37(28), 1998, published; docs/references.md) — the
// estimate must match the periodic error measured against the true phase. Motion, ghost and seed are invented.
import { describe, expect, it } from 'vitest';
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
});
