import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { FAST_ATAN2_MAX_ERROR_RAD, fastAtan2, wrapPhase } from '../../src/core/index.js';

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
  it('wraps into [-π, π) and keeps the angle', () => {
    fc.assert(
      fc.property(fc.double({ min: -1e4, max: 1e4, noNaN: true }), (phase) => {
        const wrapped = wrapPhase(phase);
        const turns = (phase - wrapped) / (2 * Math.PI);
        return wrapped >= -Math.PI && wrapped < Math.PI && Math.abs(turns - Math.round(turns)) < 1e-9;
      }),
    );
    expect(wrapPhase(Math.PI)).toBeCloseTo(-Math.PI, 15);
  });
});
