// Error against a known truth: maximum, RMS, the straight-line trend and the periodic error left after it.
// Check values are constructed: a measurement made from the truth by a known scale error, offset and a sinusoidal
// periodic error of known amplitude, so the summary must return those numbers (derived from the model).
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import '../support/property-seed.js';
import { createTruthComparison } from '../../src/core/index.js';

const FRINGE_M = 632.9908e-9 / 2; // He-Ne, fold 2 (docs/references.md, CIPM 2007; fold: common practice)

function ramp(samples: number, fringes: number, scale: number, periodicM: number, secondM = 0) {
  const truth = new Float64Array(samples);
  const measured = new Float64Array(samples);
  for (let i = 0; i < samples; i++) {
    const p = (i / samples) * fringes * FRINGE_M;
    const phase = (2 * Math.PI * p) / FRINGE_M;
    truth[i] = 1e-3 + p; // the truth's own zero is elsewhere: both are zeroed at the first sample
    measured[i] = p * (1 + scale) + periodicM * Math.sin(phase) + secondM * Math.cos(2 * phase);
  }
  return { truth, measured };
}

describe('createTruthComparison', () => {
  it('separates a scale error from a once-per-fringe periodic error of known size', () => {
    const { truth, measured } = ramp(64_000, 40, 2e-6, 0.5e-9, 0.2e-9);
    const comparison = createTruthComparison({ metresPerFringe: FRINGE_M });
    comparison.add(measured, truth, measured.length);
    const s = comparison.summary();
    expect(s.samples).toBe(64_000);
    expect(s.trend.scaleError).toBeCloseTo(2e-6, 9); // the periodic terms average out over whole fringes
    expect(s.periodic.firstHarmonicM).toBeCloseTo(0.5e-9, 11); // 64 bins: the binning attenuates by sinc(1/64) ≈ 0.9996
    expect(s.periodic.secondHarmonicM).toBeCloseTo(0.2e-9, 11);
    expect(s.periodic.binCoverage).toBe(1);
    // The whole error: up to 40 fringes × 2 ppm plus the periodic terms, which the zeroing at the first sample
    // (where the 2nd harmonic stands at +0.2 nm) shifts by 0.2 nm.
    expect(s.maxAbsErrorM).toBeGreaterThan(40 * FRINGE_M * 2e-6);
    expect(s.maxAbsErrorM).toBeLessThan(40 * FRINGE_M * 2e-6 + 0.9e-9 + 1e-12);
  });

  it('reads a perfect measurement as zero error, and nothing as NaN', () => {
    const { truth } = ramp(1000, 3, 0, 0);
    const comparison = createTruthComparison({ metresPerFringe: FRINGE_M });
    expect(comparison.summary().samples).toBe(0);
    expect(comparison.summary().maxAbsErrorM).toBeNaN();
    const measured = truth.map((value) => value - 1e-3);
    comparison.add(measured, truth, truth.length);
    expect(comparison.summary().maxAbsErrorM).toBeLessThan(1e-18);
    comparison.reset();
    expect(comparison.summary().samples).toBe(0);
  });

  it('gives the same summary for any split of the input into blocks, skipping non-finite pairs', () => {
    const { truth, measured } = ramp(3000, 5, -1e-6, 0.3e-9);
    measured[17] = Number.NaN;
    const whole = createTruthComparison({ metresPerFringe: FRINGE_M });
    whole.add(measured, truth, truth.length);
    const expected = whole.summary();
    expect(expected.samples).toBe(2999);
    fc.assert(
      fc.property(fc.array(fc.integer({ min: 1, max: 700 }), { minLength: 1, maxLength: 20 }), (sizes) => {
        const split = createTruthComparison({ metresPerFringe: FRINGE_M });
        let at = 0;
        for (let k = 0; at < truth.length; k++) {
          const n = Math.min(sizes[k % sizes.length]!, truth.length - at);
          split.add(measured.subarray(at), truth.subarray(at), n);
          at += n;
        }
        expect(split.summary()).toEqual(expected);
      }),
    );
  });

  it('refuses a fringe length that is not a positive number', () => {
    expect(() => createTruthComparison({ metresPerFringe: 0 })).toThrow('metresPerFringe must be a positive finite number (got 0)');
  });
});
