// Velocity-aided unwrapping: exact count through moves up to 0.8 fringe per sample while the step changes by less
// than the stated bound per sample; never worse than the plain rule on motion the plain rule counts exactly;
// outside the bound, never a silent wrong count. Check values are the simulated trajectories themselves (truth);
// the plain unwrapper's half-fringe limit is common practice (docs/references.md).
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import {
  aidedAccelerationLimit,
  createPipeline,
  createQuadratureSynthesizer,
  type AlarmEvent,
  type EllipseCalibration,
  type UnwrapMethod,
} from '../../src/core/index.js';

const RATE_HZ = 1e6;
const LIMIT = aidedAccelerationLimit(); // rad per sample²
const ellipse: EllipseCalibration = { offsetX: 300, offsetY: -200, amplitudeX: 10000, amplitudeY: 9500, phaseErrorRad: 0.04 };
const PEAK = 0.8 * 2 * Math.PI; // 0.8 fringe per sample
const NOISE = 30; // 0.3 % of the radius: about 0.003 rad of phase noise

/** A smooth move: accelerate, cruise, decelerate, in segments of constant acceleration (|A| ≤ accel). */
function trajectory(segments: ReadonlyArray<{ accel: number; samples: number }>, maxStep: number) {
  const phase: number[] = [0];
  let step = 0;
  for (const { accel, samples } of segments) {
    for (let i = 0; i < samples; i++) {
      step = Math.max(-maxStep, Math.min(maxStep, step + accel));
      phase.push(phase[phase.length - 1]! + step);
    }
  }
  return Float64Array.from(phase);
}

/** Steps that change by `changes[i]` × limit per sample, kept within ±maxStep, from rest. */
function jerky(changes: readonly number[], limit: number, maxStep: number) {
  const phase = new Float64Array(changes.length + 1);
  let step = 0;
  for (let i = 0; i < changes.length; i++) {
    step = Math.max(-maxStep, Math.min(maxStep, step + changes[i]! * limit));
    phase[i + 1] = phase[i]! + step;
  }
  return phase;
}

function run(phase: Float64Array, unwrap: UnwrapMethod, noiseRms: number, seed: number, rateHz = RATE_HZ) {
  const n = phase.length;
  const x = new Float64Array(n);
  const y = new Float64Array(n);
  createQuadratureSynthesizer({ ellipse, noiseRms, seed }).process(phase, x, y, n);
  const pipeline = createPipeline({ rateHz, wavelengthM: 632.9908e-9, fold: 2, calibration: ellipse, unwrap });
  const out = { positionM: new Float64Array(n), velocityMS: new Float64Array(n), level: new Float32Array(n), flags: new Uint8Array(n) };
  const events: AlarmEvent[] = [];
  pipeline.process(x, y, n, out, events);
  return { out, events };
}

function track(phase: Float64Array, unwrap: UnwrapMethod, noiseRms: number, seed: number, rateHz = RATE_HZ) {
  const { out, events } = run(phase, unwrap, noiseRms, seed, rateHz);
  const n = phase.length;
  const fringesPerMetre = 2 / 632.9908e-9;
  let worstFringes = 0;
  for (let i = 0; i < n; i++) {
    worstFringes = Math.max(worstFringes, Math.abs(out.positionM[i]! * fringesPerMetre - (phase[i]! - phase[0]!) / (2 * Math.PI)));
  }
  return { worstFringes, countLost: events.some((e) => e.kind === 'countLost' && e.state === 'raised') };
}

const segment = (scale: number) =>
  fc.record({ accel: fc.double({ min: -scale, max: scale, noNaN: true }), samples: fc.integer({ min: 50, max: 800 }) });

describe('velocity-aided unwrapping', () => {
  it('keeps the exact count up to 0.8 fringe per sample inside the bound, with 0.3 % noise', () => {
    fc.assert(
      fc.property(fc.array(segment(LIMIT), { minLength: 2, maxLength: 12 }), fc.integer({ min: 1, max: 1000 }), (segments, seed) => {
        // Always include a full-speed excursion: up to the peak and back down.
        const climb = Math.ceil(PEAK / LIMIT);
        const moves = [{ accel: LIMIT, samples: climb }, ...segments, { accel: -LIMIT, samples: 2 * climb }];
        const { worstFringes, countLost } = track(trajectory(moves, PEAK), 'velocity-aided', NOISE, seed);
        expect(countLost).toBe(false);
        // Exact count: the error is phase noise (about 5e-4 fringe RMS), not fringes.
        expect(worstFringes).toBeLessThan(0.01);
      }),
      { numRuns: 40 },
    );
  });

  it('the plain unwrapper cannot follow the same move: it raises count lost', () => {
    const climb = Math.ceil(PEAK / LIMIT);
    const phase = trajectory([{ accel: LIMIT, samples: climb }, { accel: 0, samples: 500 }, { accel: -LIMIT, samples: climb }], PEAK);
    expect(track(phase, 'plain', NOISE, 1).countLost).toBe(true);
    expect(track(phase, 'velocity-aided', NOISE, 1)).toMatchObject({ countLost: false });
  });

  it('never counts worse than the plain rule on motion the plain rule counts exactly (step changes within the bound)', () => {
    fc.assert(
      fc.property(
        fc.array(fc.double({ min: -1, max: 1, noNaN: true }), { minLength: 100, maxLength: 3000 }),
        fc.integer({ min: 1, max: 1000 }),
        (changes, seed) => {
          // Steps up to 0.35 fringe per sample: the plain rule counts them exactly, without count lost.
          const phase = jerky(changes, LIMIT, 0.7 * Math.PI);
          const plain = track(phase, 'plain', NOISE, seed);
          expect(plain).toMatchObject({ countLost: false });
          expect(plain.worstFringes).toBeLessThan(0.01);
          const aided = track(phase, 'velocity-aided', NOISE, seed);
          expect(aided.countLost).toBe(false);
          expect(aided.worstFringes).toBeLessThan(0.01);
        },
      ),
      { numRuns: 60 },
    );
  });

  it('below an eighth of a fringe per sample it is the plain rule: identical outputs and alarms', () => {
    fc.assert(
      fc.property(
        fc.array(fc.double({ min: -1, max: 1, noNaN: true }), { minLength: 50, maxLength: 2000 }),
        fc.double({ min: 0.01, max: 2, noNaN: true }),
        fc.integer({ min: 1, max: 1000 }),
        (changes, scale, seed) => {
          const phase = jerky(changes, scale * LIMIT, 0.24 * Math.PI);
          const plain = run(phase, 'plain', NOISE, seed);
          const aided = run(phase, 'velocity-aided', NOISE, seed);
          expect(aided.out).toEqual(plain.out);
          expect(aided.events).toEqual(plain.events);
        },
      ),
      { numRuns: 60 },
    );
  });

  it('outside the bound it never gives a wrong count silently (step changes up to 0.47 fringe per sample)', () => {
    let lostRuns = 0;
    fc.assert(
      fc.property(
        fc.array(fc.double({ min: -1, max: 1, noNaN: true }), { minLength: 100, maxLength: 2000 }),
        fc.double({ min: 1.5, max: 2.5, noNaN: true }), // up to 0.94π per sample, under the π at which it would alias
        fc.integer({ min: 1, max: 1000 }),
        (changes, overshoot, seed) => {
          // The first change is the largest: from rest by overshoot × the bound.
          const { worstFringes, countLost } = track(jerky([1, ...changes], overshoot * LIMIT, 1.7 * Math.PI), 'velocity-aided', NOISE, seed);
          if (countLost) lostRuns++;
          else expect(worstFringes).toBeLessThan(0.01);
        },
      ),
      { numRuns: 60 },
    );
    expect(lostRuns).toBeGreaterThan(10); // the bound is really exceeded in these runs
  });

  it('counts a stage vibration exactly that the loop-predicting rule lost hundreds of fringes on', () => {
    // Invented motion shaped like the real stage excursion of issue 10 (decimated to 250 kHz, steps up to 0.34
    // fringe per sample): 300 Hz, from rest. The previous rule (prediction from the velocity loop at rate/100)
    // slipped 379 fringes on it; plain counts it exactly (both measured, docs/signal-chain.md).
    const rateHz = 250e3;
    const n = 5000;
    for (const [hz, peakFringes] of [[300, 0.34], [3000, 0.34], [3000, 0.7]] as const) {
      const amplitudeRad = (peakFringes * 2 * Math.PI * rateHz) / (2 * Math.PI * hz);
      const phase = Float64Array.from({ length: n }, (_, i) => amplitudeRad * (1 - Math.cos((2 * Math.PI * hz * i) / rateHz)));
      const result = track(phase, 'velocity-aided', NOISE / 1.5, 7, rateHz);
      expect(result.countLost).toBe(false);
      expect(result.worstFringes).toBeLessThan(0.01);
    }
  });

  it('states the bound in m/s²: 3λf²/(16·fold), about 59 000 m/s² at 1 MHz, fold 2, 633 nm', () => {
    const metresPerRad = 632.9908e-9 / (2 * 2 * Math.PI);
    // 3π/8 rad/sample² × (10⁶ /s)² × λ/(4π) = 3/32 × 632.9908e-9 × 10¹² = 59 343 m/s² (worked by hand).
    expect(LIMIT * RATE_HZ ** 2 * metresPerRad).toBeCloseTo(59_343, -1);
  });
});
