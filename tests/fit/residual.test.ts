// What the ellipse misses. Check values: (1) the ghost-beam model of Wu & Deslattes, Appl. Opt. 37(28) (1998)
// (published; for homodyne ghost reflections see docs/references.md): a detected signal e^{iφ} + g·e^{i(kφ+θ)} has
// radius ≈ 1 + g·cos((k−1)φ + θ), so the radius harmonic of order k − 1 has amplitude g; (2) the Allan variance
// of white noise falls as τ^−1 and of a random walk rises as τ^+1, i.e. spectral slopes 0 and −2 (Allan, Proc.
// IEEE 54(2), 1966, published). Signals and seeds are invented.
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import '../support/property-seed.js';
import { createRandom, createResidualAnalyzer } from '../../src/core/index.js';

const N = 131072;
const SAMPLES_PER_FRINGE = 350;

function signal(make: (i: number, phase: number, noise: () => number) => [number, number], seed = 7) {
  const random = createRandom(seed);
  const u = new Float64Array(N);
  const v = new Float64Array(N);
  for (let i = 0; i < N; i++) {
    const [x, y] = make(i, (2 * Math.PI * i) / SAMPLES_PER_FRINGE, () => random.gaussian());
    u[i] = x;
    v[i] = y;
  }
  return { u, v };
}

function analyse(u: Float64Array, v: Float64Array) {
  const analyzer = createResidualAnalyzer();
  analyzer.add(u, v, u.length);
  return analyzer.summary();
}

describe('residual analysis', () => {
  it('reads a ghost beam of k extra passes as a radius harmonic of order k − 1 and amplitude g', () => {
    for (const [k, g] of [[2, 0.01], [3, 0.004], [5, 0.002]] as const) {
      const { u, v } = signal((_, p, n) => [
        Math.cos(p) + g * Math.cos(k * p + 0.4) + 0.002 * n(),
        Math.sin(p) + g * Math.sin(k * p + 0.4) + 0.002 * n(),
      ]);
      const summary = analyse(u, v);
      summary.radiusHarmonics.forEach((amplitude, index) => {
        if (index + 1 === k - 1) expect(amplitude).toBeCloseTo(g, 4);
        else expect(amplitude).toBeLessThan(1e-4);
      });
      expect(summary.noiseSpectralSlope).toBeCloseTo(0, 0);
      expect(summary.radiusDriftRelative).toBeLessThan(1e-3);
    }
  });

  it('tells white noise (slope 0) from a random walk of the radius (slope −2), and measures the noise RMS', () => {
    const white = analyse(...Object.values(signal((_, p, n) => [Math.cos(p) + 0.003 * n(), Math.sin(p) + 0.003 * n()])) as [Float64Array, Float64Array]);
    expect(white.noiseSpectralSlope).toBeGreaterThan(-0.2);
    expect(white.noiseSpectralSlope).toBeLessThan(0.2);
    expect(white.radiusNoiseRms).toBeCloseTo(0.003, 4);
    let walk = 0;
    const red = analyse(...Object.values(signal((_, p, n) => {
      walk += 2e-4 * n();
      return [(1 + walk) * Math.cos(p), (1 + walk) * Math.sin(p)];
    })) as [Float64Array, Float64Array]);
    expect(red.noiseSpectralSlope).toBeGreaterThan(-2.3);
    expect(red.noiseSpectralSlope).toBeLessThan(-1.7);
  });

  it('measures a slow drift of the radius, and a dwell at one phase does not read as drift', () => {
    const drifting = signal((i, p, n) => {
      const r = 1 + (0.04 * i) / N;
      return [r * Math.cos(p) + 0.002 * n(), r * Math.sin(p) + 0.002 * n()];
    });
    expect(analyse(drifting.u, drifting.v).radiusDriftRelative).toBeCloseTo(0.04, 2);
    const dwelling = signal((i, p, n) => {
      const phase = i < N / 2 ? 0.3 : p;
      const r = 1 + 0.01 * Math.cos(phase);
      return [r * Math.cos(phase) + 0.002 * n(), r * Math.sin(phase) + 0.002 * n()];
    });
    const summary = analyse(dwelling.u, dwelling.v);
    expect(summary.radiusDriftRelative).toBeLessThan(1e-3);
    expect(summary.radiusHarmonics[0]).toBeCloseTo(0.01, 3);
  });

  it('states no harmonics on too little of the fringe, and any block split gives the same summary', () => {
    const { u, v } = signal((_, p, n) => [Math.cos(p / 8) + 0.002 * n(), Math.sin(p / 8) + 0.002 * n()]);
    const partial = createResidualAnalyzer();
    partial.add(u, v, 1400); // 1400 samples at 2800 per fringe: half of the bins
    expect(partial.summary().radiusHarmonics.every(Number.isNaN)).toBe(true);
    const whole = analyse(u, v);
    fc.assert(
      fc.property(fc.array(fc.integer({ min: 0, max: N }), { maxLength: 5 }), (cuts) => {
        const analyzer = createResidualAnalyzer();
        let start = 0;
        for (const cut of [...cuts.sort((a, b) => a - b), N]) {
          analyzer.add(u.subarray(start, cut), v.subarray(start, cut), cut - start);
          start = cut;
        }
        const split = analyzer.summary();
        expect(split.samples).toBe(whole.samples);
        split.radiusHarmonics.forEach((h, k) => expect(h).toBeCloseTo(whole.radiusHarmonics[k]!, 12));
        expect(split.noiseSpectralSlope).toBeCloseTo(whole.noiseSpectralSlope, 10);
        expect(split.radiusDriftRelative).toBeCloseTo(whole.radiusDriftRelative, 12);
      }),
      { numRuns: 10 },
    );
  });

  it('skip(n) gives the same result as n unused samples, for any blocks', () => {
    const { u, v } = signal((_, p, n) => [1.01 * Math.cos(p) + 0.002 * n(), Math.sin(p) * (1 + 0.003 * Math.cos(3 * p)) + 0.002 * n()]);
    fc.assert(
      fc.property(fc.array(fc.tuple(fc.integer({ min: 1, max: 20_000 }), fc.boolean()), { minLength: 1, maxLength: 20 }), (blocks) => {
        const unused = createResidualAnalyzer();
        const skipping = createResidualAnalyzer();
        const zeros = new Uint8Array(N);
        let start = 0;
        for (const [length, skip] of blocks) {
          const n = Math.min(length, N - start);
          const [bu, bv] = [u.subarray(start, start + n), v.subarray(start, start + n)];
          unused.add(bu, bv, n, skip ? zeros : undefined);
          if (skip) skipping.skip(n);
          else skipping.add(bu, bv, n);
          start += n;
        }
        // One more analysed sample, so that both have seen the same run length in their time segments.
        unused.add(u, v, 1);
        skipping.add(u, v, 1);
        expect(skipping.summary()).toEqual(unused.summary());
        expect(Array.from(skipping.radiusByPhase())).toEqual(Array.from(unused.radiusByPhase()));
        expect(skipping.radiusOverTime()).toEqual(unused.radiusOverTime());
      }),
      { numRuns: 20 },
    );
  });

  it('compares the drift of a run analysed one block in four (skip), segments holding a quarter of their samples', () => {
    const { u, v } = signal((i, p, n) => {
      const r = 1 + 0.04 * (i / N); // invented: the radius grows by 4 % over the run
      return [r * Math.cos(p) + 0.002 * n(), r * Math.sin(p) + 0.002 * n()];
    });
    const every = createResidualAnalyzer();
    const quarter = createResidualAnalyzer();
    for (let start = 0, block = 0; start < N; start += 1024, block++) {
      every.add(u.subarray(start, start + 1024), v.subarray(start, start + 1024), 1024);
      if (block % 4 === 0) quarter.add(u.subarray(start, start + 1024), v.subarray(start, start + 1024), 1024);
      else quarter.skip(1024);
    }
    expect(every.summary().radiusDriftRelative).toBeCloseTo(0.04, 2);
    expect(quarter.summary().radiusDriftRelative).toBeCloseTo(0.04, 2);
  });
});
