// Welch spectral density, cumulative RMS, periodic-error lines and the overlapping Allan deviation. Check values:
// the DFT's definition, Parseval's theorem, Heinzel, Rüdiger & Schilling 2002 (published: PSD and linear-spectrum
// scaling, Hann NENBW = 1.5 bins), the white-noise level 2σ²/f_s of a one-sided PSD (published, same report §9),
// Allan 1966 / NIST SP 1065 (published method; the drift result Dτ/√2 is memory) and a hand-worked example.
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import {
  allanAveragingFactors,
  createAveragingDecimator,
  createFft,
  createRandom,
  createStabilityAnalyzer,
  createWelchEstimator,
  cumulativeRms,
  lineRms,
  overlappingAllanDeviation,
  periodicErrorLinesHz,
} from '../../src/core/index.js';

const gaussianNoise = (seed: number, n: number, sigma: number) => {
  const random = createRandom(seed);
  return Float64Array.from({ length: n }, () => sigma * random.gaussian());
};

describe('createFft', () => {
  it('matches the DFT by its definition', () => {
    fc.assert(
      fc.property(fc.integer({ min: 1, max: 7 }), fc.integer({ min: 0, max: 2 ** 31 }), (bits, seed) => {
        const n = 2 ** bits;
        const random = createRandom(seed);
        const x = Float64Array.from({ length: n }, () => random.uniform() - 0.5);
        const y = Float64Array.from({ length: n }, () => random.uniform() - 0.5);
        const re = x.slice();
        const im = y.slice();
        createFft(n).transform(re, im);
        for (let k = 0; k < n; k++) {
          let sr = 0;
          let si = 0;
          for (let j = 0; j < n; j++) {
            const angle = (-2 * Math.PI * j * k) / n;
            sr += x[j]! * Math.cos(angle) - y[j]! * Math.sin(angle);
            si += x[j]! * Math.sin(angle) + y[j]! * Math.cos(angle);
          }
          // Rounding of O(n log n) operations on values below 1: 1e-12 is far above it and far below any wrong bin.
          expect(Math.abs(re[k]! - sr)).toBeLessThan(1e-12);
          expect(Math.abs(im[k]! - si)).toBeLessThan(1e-12);
        }
      }),
    );
  });

  it('rejects sizes that are not powers of two', () => {
    expect(() => createFft(12)).toThrow(/size must be a power of two \(got 12\)/);
    expect(() => createFft(1)).toThrow(/size must be an integer in 2\.\./);
  });
});

describe('createWelchEstimator', () => {
  it("keeps Parseval's theorem: the PSD integrates to the windowed mean square", () => {
    // Σ_k PSD_k Δf = Σ_j (w_j x_j)² / S₂ for one segment without detrending (Parseval; Heinzel et al. 2002 §9).
    fc.assert(
      fc.property(fc.integer({ min: 0, max: 2 ** 31 }), fc.constantFrom('hann' as const, 'rectangular' as const), fc.integer({ min: 4, max: 10 }), (seed, window, bits) => {
        const n = 2 ** bits;
        const random = createRandom(seed);
        const x = Float64Array.from({ length: n }, () => 3 * random.uniform() - 1);
        const welch = createWelchEstimator({ rateHz: 1000, segmentSamples: n, window, detrend: 'none' });
        welch.add(x, n);
        const spectrum = welch.result();
        let weighted = 0;
        let s2 = 0;
        for (let j = 0; j < n; j++) {
          const w = window === 'hann' ? 0.5 - 0.5 * Math.cos((2 * Math.PI * j) / n) : 1;
          weighted += (w * x[j]!) ** 2;
          s2 += w * w;
        }
        const total = cumulativeRms(spectrum.psd, spectrum.binWidthHz);
        expect(total[total.length - 1]! ** 2 / (weighted / s2) - 1).toBeCloseTo(0, 12);
      }),
    );
  });

  it('gives the RMS amplitude of a bin-centred sinusoid as √(PSD·ENBW), with the Hann window 1.5 bins wide', () => {
    // Heinzel et al. 2002 (published): PS = PSD · ENBW, and the linear spectrum of a bin-centred sinusoid is its RMS
    // amplitude A/√2; their table gives the Hann window NENBW = 1.5 bins. Exact up to rounding: tolerance 1e-12.
    const rateHz = 10_000;
    const n = 1024;
    const amplitude = 3e-9;
    const bin = 100;
    const x = Float64Array.from({ length: 8 * n }, (_, j) => amplitude * Math.sin((2 * Math.PI * bin * j) / n + 0.4) + 1e-6);
    // Mean removal takes the offset exactly (the sine holds whole cycles); a fitted line would take a 6e-9 share of it.
    const welch = createWelchEstimator({ rateHz, segmentSamples: n, detrend: 'mean' });
    welch.add(x, x.length);
    const spectrum = welch.result();
    expect(spectrum.segments).toBe(15); // 8 segments' worth at half overlap: (8n − n)/(n/2) + 1
    expect(spectrum.enbwHz / spectrum.binWidthHz).toBeCloseTo(1.5, 12);
    expect(spectrum.frequencyHz[bin]).toBeCloseTo((bin * rateHz) / n, 9);
    expect(Math.sqrt(spectrum.psd[bin]! * spectrum.enbwHz) / (amplitude / Math.SQRT2) - 1).toBeCloseTo(0, 10);
    // Off the line and its two Hann neighbours only rounding is left.
    expect(spectrum.asd[bin + 3]!).toBeLessThan(1e-6 * spectrum.asd[bin]!);
  });

  it('measures white noise at its level σ·√(2/f_s)', () => {
    // One-sided PSD of white noise of variance σ² sampled at f_s: 2σ²/f_s (Heinzel et al. 2002 §9, published).
    // 200 segments of 512 bins: each bin's mean has a relative spread of about 1/√(200·(1 + overlap gain)),
    // and the level is the mean over 250 bins, so 2 % is over ten standard deviations.
    const rateHz = 50_000;
    const sigma = 2e-9;
    const x = gaussianNoise(7, 1024 * 101, sigma);
    const welch = createWelchEstimator({ rateHz, segmentSamples: 1024, detrend: 'none' });
    welch.add(x, x.length);
    const spectrum = welch.result();
    let sum = 0;
    for (let k = 2; k < 510; k++) sum += spectrum.psd[k]!;
    const level = sum / 508;
    expect(Math.abs(level / ((2 * sigma * sigma) / rateHz) - 1)).toBeLessThan(0.02);
    const asd = Math.sqrt(level);
    expect(Math.abs(asd / (sigma * Math.sqrt(2 / rateHz)) - 1)).toBeLessThan(0.01);
    const rms = cumulativeRms(spectrum.psd, spectrum.binWidthHz);
    expect(Math.abs(rms[rms.length - 1]! / sigma - 1)).toBeLessThan(0.02);
  });

  it('measures a line between bins by its power over ±3 bins', () => {
    // Parseval: a sinusoid of amplitude A carries A²/2 whatever its frequency; Hann leakage beyond ±3 bins is below
    // 0.1 % of it (Heinzel et al. 2002: sidelobes fall 18 dB per octave), so 0.5 % holds for any place between bins.
    fc.assert(
      fc.property(fc.double({ min: 40, max: 200, noNaN: true }), fc.double({ min: 0, max: 6.28, noNaN: true }), (bin, phase) => {
        const n = 512;
        const x = Float64Array.from({ length: 16 * n }, (_, j) => 2e-9 * Math.sin((2 * Math.PI * bin * j) / n + phase));
        const welch = createWelchEstimator({ rateHz: 1000, segmentSamples: n });
        welch.add(x, x.length);
        const rms = lineRms(welch.result(), (bin * 1000) / n);
        expect(Math.abs(rms / (2e-9 / Math.SQRT2) - 1)).toBeLessThan(0.005);
      }),
      { numRuns: 30 },
    );
  });

  it('removes a ramp per segment, so a line on a constant-velocity move stands out', () => {
    const rateHz = 100_000;
    const n = 2048;
    const x = Float64Array.from({ length: 4 * n }, (_, j) => 0.01 * (j / rateHz) + 1e-9 * Math.sin((2 * Math.PI * 300 * j) / n));
    const welch = createWelchEstimator({ rateHz, segmentSamples: n });
    welch.add(x, x.length);
    const spectrum = welch.result();
    expect(Math.sqrt(spectrum.psd[300]! * spectrum.enbwHz) / (1e-9 / Math.SQRT2)).toBeCloseTo(1, 5);
  });

  it('gives the same result for any split of the input into blocks, and after reset as new', () => {
    fc.assert(
      fc.property(fc.array(fc.integer({ min: 1, max: 700 }), { minLength: 1, maxLength: 12 }), fc.double({ min: 0, max: 0.95, noNaN: true }), (chunks, overlap) => {
        const x = gaussianNoise(3, 2000, 1);
        const whole = createWelchEstimator({ rateHz: 1, segmentSamples: 128, overlap });
        whole.add(x, x.length);
        const split = createWelchEstimator({ rateHz: 1, segmentSamples: 128, overlap });
        split.add(gaussianNoise(9, 500, 1), 500);
        split.reset();
        let at = 0;
        for (let c = 0; at < x.length; c = (c + 1) % chunks.length) {
          const take = Math.min(chunks[c]!, x.length - at);
          split.add(x.subarray(at, at + take), take);
          at += take;
        }
        expect(split.segments).toBe(whole.segments);
        expect(Array.from(split.result().psd)).toEqual(Array.from(whole.result().psd));
      }),
    );
  });

  it('leaves out segments holding a non-finite value, and rejects bad options', () => {
    const x = gaussianNoise(1, 64, 1);
    x[40] = Number.NaN;
    const welch = createWelchEstimator({ rateHz: 1, segmentSamples: 16, overlap: 0 });
    welch.add(x, 64);
    expect(welch.segments).toBe(3);
    expect(welch.skippedSegments).toBe(1);
    expect(Number.isFinite(welch.result().psd[3]!)).toBe(true);
    expect(() => createWelchEstimator({ rateHz: 1, segmentSamples: 100 })).toThrow(/segmentSamples must be a power of two \(got 100\)/);
    expect(() => createWelchEstimator({ rateHz: 0 })).toThrow(/rateHz must be a positive finite number \(got 0\)/);
    expect(() => createWelchEstimator({ rateHz: 1, overlap: 0.99 })).toThrow(/overlap must be a number in \[0, 0.95\]/);
    expect(() => createWelchEstimator({ rateHz: 1, window: 'flat' as 'hann' })).toThrow(/window must be one of "hann", "rectangular"/);
  });
});

describe('periodicErrorLinesHz', () => {
  it('puts the fringe frequency at N·n·v/λ and its multiples below the limit', () => {
    // docs/references.md (common practice): Doppler frequency N·n·v/λ; 0.01 m/s, fold 2, λ 632.9908 nm, n = 1: 31 596.04 Hz.
    const lines = periodicErrorLinesHz(-0.01, 632.9908e-9 / 2, 100_000);
    expect(lines.length).toBe(3);
    expect(lines[0]).toBeCloseTo((2 * 0.01) / 632.9908e-9, 6);
    expect(lines[0]).toBeCloseTo(31_596.04, 1);
    expect(lines[2]).toBeCloseTo((3 * 2 * 0.01) / 632.9908e-9, 6);
    expect(periodicErrorLinesHz(0, 1e-6, 1000).length).toBe(0);
  });
});

describe('overlappingAllanDeviation', () => {
  it('matches a hand-worked example', () => {
    // y = 1, 3, 2, 5, 4. m = 1: differences 2, −1, 3, −1, σ² = 15 / (2·4) = 1.875. m = 2: means 2, 2.5, 3.5, 4.5,
    // differences 1.5 and 2, σ² = 6.25 / (2·2) = 1.5625, σ = 1.25. (Hand-worked from the definition.)
    const result = overlappingAllanDeviation([1, 3, 2, 5, 4], 5, 0.5, [1, 2]);
    expect(result.deviation[0]).toBeCloseTo(Math.sqrt(1.875), 14);
    expect(result.deviation[1]).toBeCloseTo(1.25, 14);
    expect(Array.from(result.tauS)).toEqual([0.5, 1]);
    expect(Array.from(result.terms)).toEqual([4, 2]);
  });

  it('falls as σ/√m for uncorrelated values and rises as Dτ/√2 for a linear drift', () => {
    // White (uncorrelated) values: σ(mτ₀) = σ/√m (Allan 1966, published: the τ^(−1/2) law of white noise). With
    // 2^17 values the estimate at m ≤ 64 has over 2000 effectively independent terms: 10 % is ample.
    const sigma = 5e-9;
    const x = gaussianNoise(11, 2 ** 17, sigma);
    const factors = allanAveragingFactors(x.length, 5);
    const white = overlappingAllanDeviation(x, x.length, 1e-3, factors);
    for (let f = 0; f < factors.length && factors[f]! <= 64; f++) {
      expect(Math.abs(white.deviation[f]! / (sigma / Math.sqrt(factors[f]!)) - 1)).toBeLessThan(0.1);
    }
    // Drift D per second: σ(τ) = Dτ/√2 exactly (NIST SP 1065, memory; follows from the definition).
    const drift = Float64Array.from({ length: 1000 }, (_, i) => 1.5 + 2e-6 * i * 1e-3);
    const result = overlappingAllanDeviation(drift, drift.length, 1e-3, [1, 10, 300]);
    for (let f = 0; f < 3; f++) expect(result.deviation[f]! / ((2e-6 * result.tauS[f]!) / Math.SQRT2) - 1).toBeCloseTo(0, 6);
  });

  it('spaces the averaging factors evenly in log and keeps two means for the largest', () => {
    const factors = Array.from(allanAveragingFactors(1000, 10));
    expect(factors[0]).toBe(1);
    expect(factors[factors.length - 1]).toBeLessThanOrEqual(499);
    expect(new Set(factors).size).toBe(factors.length);
    expect(factors.every((m, k) => k === 0 || m > factors[k - 1]!)).toBe(true);
    expect(() => overlappingAllanDeviation([1, 2, 3], 3, 1, [2])).toThrow(/factors\[\] must be an integer in 1\.\.1/);
  });
});

describe('createAveragingDecimator', () => {
  it('stores means of equal runs in bounded memory, whatever the block split', () => {
    fc.assert(
      fc.property(fc.integer({ min: 1, max: 300 }), fc.integer({ min: 1, max: 1000 }), (chunk, total) => {
        const x = Float64Array.from({ length: total }, (_, i) => Math.sin(i) + i * 0.01);
        const decimator = createAveragingDecimator({ maxValues: 16 });
        for (let at = 0; at < total; at += chunk) decimator.add(x.subarray(at, Math.min(total, at + chunk)), Math.min(chunk, total - at));
        const stride = decimator.stride;
        const values = decimator.values();
        expect(values.length).toBe(Math.floor(total / stride));
        expect(values.length).toBeLessThan(16);
        for (let k = 0; k < values.length; k++) {
          let mean = 0;
          for (let i = 0; i < stride; i++) mean += x[k * stride + i]!;
          expect(values[k]).toBeCloseTo(mean / stride, 10);
        }
      }),
    );
  });
});

describe('createStabilityAnalyzer', () => {
  it('locates the periodic-error lines at a steady speed, and none when the speed changes', () => {
    // At 5 mm/s with 316.4954 nm per fringe (632.9908 nm, fold 2) the fringe frequency is 15 798.0 Hz
    // (docs/references.md, common practice: N·n·v/λ); a 0.5 nm once-per-fringe error must show there as 0.5/√2 nm RMS.
    const rateHz = 1_000_000;
    const metresPerFringe = 632.9908e-9 / 2;
    const n = 2 ** 17;
    const steady = Float64Array.from({ length: n }, (_, i) => {
      const x = 0.005 * (i / rateHz);
      return x + 0.5e-9 * Math.sin((2 * Math.PI * x) / metresPerFringe);
    });
    const analyzer = createStabilityAnalyzer({ rateHz, segmentSamples: 8192, metresPerFringe });
    analyzer.add(steady, n);
    const result = analyzer.result();
    expect(result.speed.steady).toBe(true);
    expect(result.speed.meanMS).toBeCloseTo(0.005, 6);
    expect(result.linesHz[0]).toBeCloseTo((2 * 0.005) / 632.9908e-9, 0);
    expect(Math.abs(lineRms(result.spectrum, result.linesHz[0]!) / (0.5e-9 / Math.SQRT2) - 1)).toBeLessThan(0.01);
    // Ramp of a moving position: the Allan deviation follows vτ/√2 (the drift law above).
    expect(result.allan.deviation[0]! / ((0.005 * result.allan.tauS[0]!) / Math.SQRT2)).toBeCloseTo(1, 2);

    const accelerating = Float64Array.from({ length: n }, (_, i) => 0.5 * 2 * (i / rateHz) ** 2);
    const moving = createStabilityAnalyzer({ rateHz, segmentSamples: 8192, metresPerFringe });
    moving.add(accelerating, n);
    expect(moving.result().speed.steady).toBe(false);
    expect(moving.result().linesHz.length).toBe(0);
    moving.reset();
    expect(moving.result().samples).toBe(0);
  });
});
