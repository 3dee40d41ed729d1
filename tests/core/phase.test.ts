import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { createPhaseTracker, FAST_ATAN2_MAX_ERROR_RAD, fastAtan2, wrapPhase } from '../../src/core/index.js';

describe('fastAtan2', () => {
  it('stays within its stated error of Math.atan2 (the ECMAScript library, reference) on a dense grid of angles and radii', () => {
    let worst = 0;
    for (let k = 0; k < 200_000; k++) {
      const angle = -Math.PI + (2 * Math.PI * k) / 200_000;
      for (const radius of [1e-6, 1, 32767]) {
        const y = radius * Math.sin(angle);
        const x = radius * Math.cos(angle);
        let difference = Math.abs(fastAtan2(y, x) - Math.atan2(y, x));
        if (difference > Math.PI) difference = 2 * Math.PI - difference; // ±π are the same angle
        worst = Math.max(worst, difference);
      }
    }
    expect(worst).toBeLessThanOrEqual(FAST_ATAN2_MAX_ERROR_RAD);
    expect(worst).toBeGreaterThan(0); // the bound is tight enough to matter, not a tautology
  });

  it('matches Math.atan2 on random finite pairs', () => {
    fc.assert(
      fc.property(fc.double({ min: -1e6, max: 1e6, noNaN: true }), fc.double({ min: -1e6, max: 1e6, noNaN: true }), (y, x) => {
        let difference = Math.abs(fastAtan2(y, x) - Math.atan2(y, x));
        if (difference > Math.PI) difference = 2 * Math.PI - difference;
        return difference <= FAST_ATAN2_MAX_ERROR_RAD;
      }),
    );
  });
});

describe('wrapPhase', () => {
  it('wraps into (-π, π] and keeps the angle', () => {
    fc.assert(
      fc.property(fc.double({ min: -1e4, max: 1e4, noNaN: true }), (phase) => {
        const wrapped = wrapPhase(phase);
        const turns = (phase - wrapped) / (2 * Math.PI);
        return wrapped > -Math.PI && wrapped <= Math.PI && Math.abs(turns - Math.round(turns)) < 1e-9;
      }),
    );
    // atan2's own range: π stays π, −π becomes π.
    expect(wrapPhase(Math.PI)).toBe(Math.PI);
    expect(wrapPhase(-Math.PI)).toBe(Math.PI);
    expect(wrapPhase(3 * Math.PI)).toBeCloseTo(Math.PI, 15);
    // One ulp inside −π is in range and stays itself (a rounding division once returned one ulp beyond π).
    const insideMinusPi = -3.1415926535897927;
    expect(wrapPhase(insideMinusPi)).toBe(insideMinusPi);
  });

  it('agrees with the tracker\'s unwrap on every step, half a fringe exactly included', () => {
    // Phases whose steps are drawn from (−π, π] with ±π itself often: the tracker's position in radians must
    // advance by exactly wrapPhase(step) each sample (alarms aside, which large steps raise).
    const step = fc.oneof(fc.constantFrom(Math.PI, -Math.PI), fc.double({ min: -Math.PI, max: Math.PI, noNaN: true }));
    fc.assert(
      fc.property(fc.array(step, { minLength: 1, maxLength: 40 }), (steps) => {
        const n = steps.length + 1;
        const phases = new Float64Array(n);
        for (let i = 1; i < n; i++) phases[i] = wrapPhase(phases[i - 1]! + steps[i - 1]!);
        const tracker = createPhaseTracker({ rateHz: 1e6 });
        const output = { turns: new Float64Array(n), phaseRad: new Float64Array(n), stepRad: new Float64Array(n), flags: new Uint8Array(n) };
        output.phaseRad.set(phases);
        tracker.processPhase(new Float32Array(n).fill(1), n, 0, output, []);
        for (let i = 1; i < n; i++) {
          const advanced = 2 * Math.PI * (output.turns[i]! - output.turns[i - 1]!) + (output.phaseRad[i]! - output.phaseRad[i - 1]!);
          expect(advanced).toBeCloseTo(wrapPhase(phases[i]! - phases[i - 1]!), 12);
        }
      }),
    );
  });
});
