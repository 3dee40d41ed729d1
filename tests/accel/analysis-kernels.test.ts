// The capture analyses' WebAssembly kernels (src/accel/analysis-kernels.ts) against the core's own loops: the
// periodic-error bins with createPeriodicErrorBinning, the phase-domain estimator with createPhaseDomainSums, the
// radius residual with createResidualRun and the model watch with createModelWatchChunkSums give the core's results
// bit for bit (each sum is the core's sequential sum; only
// independent sums share a vector), and the kernels' atan2 is Math.atan2's to the bit. Motions, noise and radii are
// invented.
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { createModelWatch, createPeriodicErrorAnalyzer, createPhaseDomainEstimator, createRandom, createResidualAnalyzer, type ModelWatchEvent } from '../../src/core/index.js';
import { createModelWatchChunkSums, createPeriodicErrorBinning, createPhaseDomainSums, createResidualRun } from '../../src/accel/index.js';
import { ANALYSIS_KERNELS_WASM_BASE64 } from '../../src/accel/analysis-kernels-wasm.js';
import { instantiate } from '../../src/accel/wasm.js';
import '../support/property-seed.js';

/** The bits of every number in a value (NaN and −0 included), for an exact comparison. */
function bits(value: unknown): unknown {
  if (typeof value === 'number') return Buffer.from(Float64Array.of(value).buffer).toString('hex');
  if (ArrayBuffer.isView(value)) return Array.from(value as Float64Array, bits);
  if (Array.isArray(value)) return value.map(bits);
  if (value !== null && typeof value === 'object') return Object.fromEntries(Object.entries(value).map(([key, entry]) => [key, bits(entry)]));
  return value;
}

/**
 * An unwrapped phase (rad): a random walk of the speed (rad/sample) about `speed`, a periodic error of `error` rad at
 * orders 1 and 2, white noise, from `start` (large values take Math.cos's long argument reduction); `holes` samples
 * masked or not finite.
 */
function motion(seed: number, samples: number, start: number, speed: number, wander: number, error: number, noise: number, holes: number) {
  const random = createRandom(seed);
  const phase = new Float64Array(samples);
  const valid = new Uint8Array(samples).fill(1);
  let p = start, v = speed;
  for (let i = 0; i < samples; i++) {
    v += wander * random.gaussian();
    p += v;
    phase[i] = p + error * Math.sin(p + 0.3) + 0.5 * error * Math.cos(2 * p) + noise * random.gaussian();
  }
  for (let k = 0; k < holes; k++) {
    const at = Math.floor(random.uniform() * samples);
    if (k % 2 === 0) valid[at] = 0;
    else phase[at] = k % 4 === 1 ? Number.NaN : Infinity;
  }
  return { phase, valid };
}

describe('analysis kernels', () => {
  it('exist on this engine (WebAssembly SIMD)', () => {
    expect(createPhaseDomainSums()).not.toBeNull();
    expect(createModelWatchChunkSums()).not.toBeNull();
    expect(createResidualRun()).not.toBeNull();
    expect(createPeriodicErrorBinning()).not.toBeNull();
  });

  it('periodic-error bins: the same sums, counts and summary as the core loop, for any phases, errors, masks and blocks', () => {
    const phase = fc.oneof(
      fc.double({ noDefaultInfinity: false }),
      fc.double({ min: -1e4, max: 1e4, noNaN: true }),
      // Whole turns and a rounding either side: the wrap's edge cases.
      fc.tuple(fc.integer({ min: -1e6, max: 1e6 }), fc.constantFrom(-1, 0, 1)).map(([turns, ulps]) => turns * 2 * Math.PI * (1 + ulps * Number.EPSILON)),
    );
    fc.assert(
      fc.property(
        fc.integer({ min: 8, max: 4096 }),
        fc.array(fc.tuple(phase, fc.oneof(fc.double({ min: -0.1, max: 0.1, noNaN: true }), fc.double({ noDefaultInfinity: false })), fc.integer({ min: 0, max: 3 })), { minLength: 1, maxLength: 6000 }),
        fc.boolean(),
        fc.integer({ min: 1, max: 5000 }),
        (bins, samples, masked, block) => {
          const phases = Float64Array.from(samples, ([p]) => p);
          const errors = Float64Array.from(samples, ([, e]) => e);
          const use = Uint8Array.from(samples, ([, , u]) => u);
          const core = createPeriodicErrorAnalyzer({ bins });
          const fast = createPeriodicErrorAnalyzer({ bins, binning: createPeriodicErrorBinning()! });
          for (const analyzer of [core, fast]) {
            for (let at = 0; at < samples.length; at += block) {
              const n = Math.min(block, samples.length - at);
              analyzer.add(phases.subarray(at), errors.subarray(at), n, masked ? use.subarray(at) : undefined);
            }
          }
          expect(bits(fast.binnedMeanRad())).toEqual(bits(core.binnedMeanRad()));
          expect(bits(fast.summary())).toEqual(bits(core.summary()));
        },
      ),
      { numRuns: 150 },
    );
  });

  it('atan2: Math.atan2 to the bit, for any doubles, points on and near the unit circle and the special values', () => {
    const kernel = instantiate<{ atan2(y: number, x: number): number }>(ANALYSIS_KERNELS_WASM_BASE64)!;
    const special = [0, -0, 1, -1, 0.5, 1.5, 2 ** -27, 2 ** -29, 0.4375, 0.6875, 1.1875, 2.4375, 2 ** 60, 2 ** 66, 5e-324, 1e-300, 1e300, Infinity, -Infinity, Number.NaN];
    const values = [...special, ...special.map((value) => -value)];
    for (const y of values) for (const x of values) expect(bits(kernel.atan2(y, x))).toBe(bits(Math.atan2(y, x)));
    const anyDouble = fc.double({ noDefaultInfinity: false });
    const onCircle = fc.tuple(fc.double({ min: -Math.PI, max: Math.PI, noNaN: true }), fc.double({ min: 0.5, max: 2, noNaN: true })).map(([angle, r]) => [r * Math.sin(angle), r * Math.cos(angle)] as const);
    fc.assert(
      fc.property(fc.oneof(fc.tuple(anyDouble, anyDouble), onCircle), ([y, x]) => {
        expect(bits(kernel.atan2(y, x))).toBe(bits(Math.atan2(y, x)));
      }),
      { numRuns: 20_000 },
    );
  });

  it('radius residual: the same summary, binned radius and radius over time as the core loop, for any samples, masks and blocks', () => {
    fc.assert(
      fc.property(
        fc.record({
          seed: fc.integer({ min: 0, max: 2 ** 32 - 1 }),
          samples: fc.integer({ min: 1, max: 12_000 }),
          bins: fc.integer({ min: 32, max: 4096 }),
          segments: fc.integer({ min: 8, max: 64 }),
          // A radius harmonic, drift and noise (relative), a phase step a sample (rad).
          harmonic: fc.double({ min: 0, max: 0.05, noNaN: true }),
          noise: fc.double({ min: 0, max: 0.02, noNaN: true }),
          step: fc.double({ min: -1, max: 1, noNaN: true }),
          holeEvery: fc.oneof(fc.constant(0), fc.integer({ min: 1, max: 500 })),
          masked: fc.boolean(),
          block: fc.integer({ min: 1, max: 9000 }),
          skip: fc.integer({ min: 0, max: 5000 }),
        }),
        ({ seed, samples, bins, segments, harmonic, noise, step, holeEvery, masked, block, skip }) => {
          const random = createRandom(seed);
          const u = new Float64Array(samples);
          const v = new Float64Array(samples);
          const use = new Uint8Array(samples).fill(1);
          for (let i = 0; i < samples; i++) {
            const phase = step * i + 0.3 * random.gaussian();
            const r = 1 + harmonic * Math.cos(3 * phase + 0.4) + 1e-3 * Math.sin(i / 900) + noise * random.gaussian();
            u[i] = r * Math.cos(phase);
            v[i] = r * Math.sin(phase);
            if (holeEvery > 0 && i % holeEvery === 0) {
              if (masked) use[i] = 0;
              else u[i] = [Number.NaN, 0, Infinity, 1e300][(i / holeEvery) % 4]!;
              if (!masked && (i / holeEvery) % 4 === 1) v[i] = 0;
            }
          }
          const core = createResidualAnalyzer({ bins, segments });
          const fast = createResidualAnalyzer({ bins, segments, run: createResidualRun()! });
          for (const analyzer of [core, fast]) {
            for (let at = 0, k = 0; at < samples; k++) {
              const n = Math.min(block, samples - at);
              // Blocks left out between analysed ones, as a long capture's schedule does.
              if (k % 3 === 2) analyzer.skip(skip);
              analyzer.add(u.subarray(at), v.subarray(at), n, masked ? use.subarray(at) : undefined);
              at += n;
            }
          }
          expect(bits(fast.summary())).toEqual(bits(core.summary()));
          expect(bits(fast.radiusByPhase())).toEqual(bits(core.radiusByPhase()));
          expect(bits(fast.radiusOverTime())).toEqual(bits(core.radiusOverTime()));
        },
      ),
      { numRuns: 80 },
    );
  });

  it('phase-domain estimator: the same summary, binned error and windows as the core loops, for any motion, orders and blocks', () => {
    fc.assert(
      fc.property(
        fc.record({
          seed: fc.integer({ min: 0, max: 2 ** 32 - 1 }),
          samples: fc.integer({ min: 100, max: 12_000 }),
          start: fc.oneof(fc.double({ min: -50, max: 50, noNaN: true }), fc.double({ min: -1e7, max: 1e7, noNaN: true })),
          speed: fc.double({ min: -0.3, max: 0.3, noNaN: true }),
          wander: fc.double({ min: 0, max: 1e-3, noNaN: true }),
          error: fc.double({ min: 0, max: 0.05, noNaN: true }),
          noise: fc.double({ min: 0, max: 0.01, noNaN: true }),
          holes: fc.integer({ min: 0, max: 6 }),
          orders: fc.integer({ min: 1, max: 8 }),
          // Windows past the kernel's first layout of 4096 samples too.
          maxWindowSamples: fc.integer({ min: 32, max: 9000 }),
          maxMisfitRad: fc.constantFrom(0.003, 0.05, 10),
          block: fc.integer({ min: 1, max: 5000 }),
        }),
        ({ seed, samples, start, speed, wander, error, noise, holes, orders, maxWindowSamples, maxMisfitRad, block }) => {
          const { phase, valid } = motion(seed, samples, start, speed, wander, error, noise, holes);
          const options = { orders, maxWindowSamples, maxMisfitRad };
          const core = createPhaseDomainEstimator(options);
          const fast = createPhaseDomainEstimator({ ...options, sums: createPhaseDomainSums()! });
          for (let at = 0; at < samples; at += block) {
            const n = Math.min(block, samples - at);
            core.process(phase.subarray(at), valid.subarray(at), n);
            fast.process(phase.subarray(at), valid.subarray(at), n);
          }
          expect(bits(fast.windows)).toEqual(bits(core.windows));
          expect(bits(fast.binnedMeanRad())).toEqual(bits(core.binnedMeanRad()));
          expect(bits(fast.summary())).toEqual(bits(core.summary()));
        },
      ),
      { numRuns: 120 },
    );
  });

  it('model watch: the same events, means and state as the core loop, for any radii, holes, masks and blocks', () => {
    fc.assert(
      fc.property(
        fc.record({
          seed: fc.integer({ min: 0, max: 2 ** 32 - 1 }),
          samples: fc.integer({ min: 1, max: 20_000 }),
          windowSamples: fc.integer({ min: 16, max: 2048 }),
          // Drifts and scatter about the bounds (in units of them), so the alarm is raised and cleared.
          drift: fc.double({ min: 0, max: 3, noNaN: true }),
          scatter: fc.double({ min: 0, max: 3, noNaN: true }),
          // Radii over decades too, whose sums round differently in another order (radii near 1 sum exactly).
          spread: fc.constantFrom(0, 0, 3),
          holeEvery: fc.oneof(fc.constant(0), fc.integer({ min: 1, max: 3000 })),
          masked: fc.boolean(),
          blocks: fc.array(fc.integer({ min: 1, max: 5000 }), { minLength: 1, maxLength: 4 }),
        }),
        ({ seed, samples, windowSamples, drift, scatter, spread, holeEvery, masked, blocks }) => {
          const random = createRandom(seed);
          const maxRadiusChange = 0.05, maxRadiusRms = 0.01;
          const radius = new Float32Array(samples);
          const use = new Uint8Array(samples).fill(1);
          for (let i = 0; i < samples; i++) {
            const slow = Math.sin((2 * Math.PI * i) / 7000);
            radius[i] = (1 + drift * maxRadiusChange * slow + scatter * maxRadiusRms * random.gaussian()) * Math.exp(spread * random.gaussian());
            if (holeEvery > 0 && i % holeEvery === 0) {
              if (masked) use[i] = 0;
              else radius[i] = [Number.NaN, 0, -1, Infinity][(i / holeEvery) % 4]!;
            }
          }
          const options = { windowSamples, maxRadiusChange, maxRadiusRms };
          const core = createModelWatch(options);
          const fast = createModelWatch({ ...options, chunkSums: createModelWatchChunkSums()! });
          const coreEvents: ModelWatchEvent[] = [];
          const fastEvents: ModelWatchEvent[] = [];
          for (let at = 0, k = 0; at < samples; k++) {
            const n = Math.min(blocks[k % blocks.length]!, samples - at);
            // A block of its own (the kernel copies a whole block from its start) or a part of the whole.
            const part = k % 2 === 0 ? radius.slice(at, at + n) : radius.subarray(at, at + n);
            const mask = masked ? use.subarray(at, at + n) : undefined;
            core.processRadius(part, n, at, coreEvents, mask);
            fast.processRadius(part, n, at, fastEvents, mask);
            at += n;
          }
          expect(bits(fastEvents)).toEqual(bits(coreEvents));
          expect(bits([fast.meanRadius, fast.radiusRms, fast.active])).toEqual(bits([core.meanRadius, core.radiusRms, core.active]));
        },
      ),
      { numRuns: 200 },
    );
  });

  it('check what they are given: a kernel that is not a function is refused', () => {
    expect(() => createPhaseDomainEstimator({ sums: 3 as never })).toThrow(/sums must be a function/);
    expect(() => createModelWatch({ chunkSums: {} as never })).toThrow(/chunkSums must be a function/);
    expect(() => createResidualAnalyzer({ run: 'fast' as never })).toThrow(/run must be a function/);
    expect(() => createPeriodicErrorAnalyzer({ binning: 1 as never })).toThrow(/binning must be a function/);
  });
});
