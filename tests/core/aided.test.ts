// Velocity-aided unwrapping: exact count through smooth moves up to 0.8 fringe per sample inside the stated
// acceleration bound; outside it, never a silent wrong count. Check values are the simulated trajectories
// themselves (truth); the plain unwrapper's half-fringe limit is common practice (docs/references.md).
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { aidedAccelerationLimit, createPipeline, createQuadratureSynthesizer, type AlarmEvent, type UnwrapMethod } from '../../src/core/index.js';

const RATE_HZ = 1e6;
const LIMIT = aidedAccelerationLimit(RATE_HZ); // rad per sample², default bandwidth rate/100
const ellipse = { offsetX: 300, offsetY: -200, amplitudeX: 10000, amplitudeY: 9500, phaseErrorRad: 0.04 };
const PEAK = 0.8 * 2 * Math.PI; // 0.8 fringe per sample

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

function track(phase: Float64Array, unwrap: UnwrapMethod, noiseRms: number, seed: number) {
  const n = phase.length;
  const x = new Float64Array(n);
  const y = new Float64Array(n);
  createQuadratureSynthesizer({ ellipse, noiseRms, seed }).process(phase, x, y, n);
  const pipeline = createPipeline({ rateHz: RATE_HZ, wavelengthM: 632.9908e-9, fold: 2, calibration: ellipse, unwrap });
  const out = { positionM: new Float64Array(n), velocityMS: new Float64Array(n), level: new Float32Array(n), flags: new Uint8Array(n) };
  const events: AlarmEvent[] = [];
  pipeline.process(x, y, n, out, events);
  const fringesPerMetre = 2 / 632.9908e-9;
  const errorFringes = out.positionM[n - 1]! * fringesPerMetre - (phase[n - 1]! - phase[0]!) / (2 * Math.PI);
  return { errorFringes, countLost: events.some((e) => e.kind === 'countLost' && e.state === 'raised') };
}

const segment = (scale: number) =>
  fc.record({ accel: fc.double({ min: -scale, max: scale, noNaN: true }), samples: fc.integer({ min: 50, max: 800 }) });

describe('velocity-aided unwrapping', () => {
  it('keeps the exact count up to 0.8 fringe per sample inside the acceleration bound, with 0.3 % noise', () => {
    fc.assert(
      fc.property(fc.array(segment(LIMIT), { minLength: 2, maxLength: 12 }), fc.integer({ min: 1, max: 1000 }), (segments, seed) => {
        // Always include a full-speed excursion: up to the peak and back down.
        const climb = Math.ceil(PEAK / LIMIT);
        const moves = [{ accel: LIMIT, samples: climb }, ...segments, { accel: -LIMIT, samples: 2 * climb }];
        const { errorFringes, countLost } = track(trajectory(moves, PEAK), 'velocity-aided', 30, seed);
        expect(countLost).toBe(false);
        // Exact count: the error is phase noise (0.3 % of the radius: about 5e-4 fringe RMS), not fringes.
        expect(Math.abs(errorFringes)).toBeLessThan(0.01);
      }),
      { numRuns: 40 },
    );
  });

  it('the plain unwrapper cannot follow the same move: it raises count lost', () => {
    const climb = Math.ceil(PEAK / LIMIT);
    const phase = trajectory([{ accel: LIMIT, samples: climb }, { accel: 0, samples: 500 }, { accel: -LIMIT, samples: climb }], PEAK);
    expect(track(phase, 'plain', 30, 1).countLost).toBe(true);
    expect(track(phase, 'velocity-aided', 30, 1)).toMatchObject({ countLost: false });
  });

  it('outside the bound it never gives a wrong count silently', () => {
    let lostRuns = 0;
    fc.assert(
      fc.property(
        fc.array(segment(20 * LIMIT), { minLength: 1, maxLength: 10 }),
        fc.double({ min: 2, max: 20, noNaN: true }),
        fc.integer({ min: 1, max: 1000 }),
        (segments, overshoot, seed) => {
          const moves = [{ accel: overshoot * LIMIT, samples: Math.ceil(PEAK / (overshoot * LIMIT)) }, ...segments];
          const { errorFringes, countLost } = track(trajectory(moves, 1.7 * Math.PI), 'velocity-aided', 30, seed);
          if (countLost) lostRuns++;
          else expect(Math.abs(errorFringes)).toBeLessThan(0.01);
        },
      ),
      { numRuns: 60 },
    );
    expect(lostRuns).toBeGreaterThan(10); // the bound is really exceeded in these runs
  });

  it('states the bound in m/s²: about 340 m/s² at 1 MHz, 10 kHz loop, fold 2, 633 nm', () => {
    const metresPerRad = 632.9908e-9 / (2 * 2 * Math.PI);
    // π·β / (2(1 − α)) with ωT = 2π/100: β = 0.003948, α = 0.08886 (worked by hand from the loop gains).
    expect(LIMIT * RATE_HZ ** 2 * metresPerRad).toBeCloseTo(342.8, 0);
  });
});
