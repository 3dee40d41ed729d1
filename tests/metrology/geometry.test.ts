import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { cosineErrorM, deadPathCorrectionM } from '../../src/core/metrology/index.js';

describe('deadPathCorrectionM', () => {
  it('corrects a 1e-6 index change over a 200 mm dead path: hand-worked example', () => {
    // Common practice (docs/references.md): dead-path error ≈ D·Δn. Hand-worked: D = 0.2 m, Δn = 1e-6 (about a 1 K
    // change of the air) gives −D Δn / n_now = −0.2e-6 / 1.000272 = −1.99945615e-7 m, about −200 nm.
    const correction = deadPathCorrectionM({ deadPathM: 0.2, indexAtDatum: 1.000271, indexNow: 1.000272 });
    expect(Math.abs(correction - -1.99945615e-7)).toBeLessThan(1e-15);
  });

  it('recovers the true displacement from a reading compensated with the current index', () => {
    // Model (common practice): the optical path changes by n_now (D + L) − n_datum D; the instrument divides by n_now.
    fc.assert(
      fc.property(
        fc.double({ min: 0, max: 2, noNaN: true }),
        fc.double({ min: -1, max: 1, noNaN: true }),
        fc.double({ min: 1.0002, max: 1.0003, noNaN: true }),
        fc.double({ min: 1.0002, max: 1.0003, noNaN: true }),
        (deadPathM, trueLengthM, indexAtDatum, indexNow) => {
          const reading = (indexNow * (deadPathM + trueLengthM) - indexAtDatum * deadPathM) / indexNow;
          const corrected = reading + deadPathCorrectionM({ deadPathM, indexAtDatum, indexNow });
          expect(Math.abs(corrected - trueLengthM)).toBeLessThan(1e-15);
        },
      ),
    );
  });

  it('is zero when the index has not changed, and rejects a negative dead path', () => {
    expect(deadPathCorrectionM({ deadPathM: 0.5, indexAtDatum: 1.00027, indexNow: 1.00027 })).toBe(-0);
    expect(() => deadPathCorrectionM({ deadPathM: -0.1, indexAtDatum: 1, indexNow: 1 })).toThrow(/deadPathM must be a finite number ≥ 0 \(got -0.1\)/);
    expect(() => deadPathCorrectionM({ deadPathM: 0.1, indexAtDatum: 0, indexNow: 1 })).toThrow(/indexAtDatum/);
  });
});

describe('cosineErrorM', () => {
  it('gives L θ²/2 for a 1 mrad misalignment over 1 m: hand-worked example', () => {
    // Common practice (docs/references.md): cosine error L (1 − cos θ) ≈ L θ²/2. Hand-worked: 1 m, 1 mrad: 0.5 µm;
    // the next series term, −L θ⁴/24 = −4.2e-14 m, sets the tolerance.
    expect(Math.abs(cosineErrorM({ lengthM: 1, misalignmentRad: 1e-3 }) - 5e-7)).toBeLessThan(1e-13);
  });

  it('keeps its precision at tiny angles, where 1 − cos θ loses its digits', () => {
    // θ = 1e-7 rad over 1 m: L θ²/2 = 5e-15 m (the θ⁴ term is 4e-30 m); 1 − Math.cos(1e-7) is off by 0.08 %.
    // θ = 1e-8 rad: 5e-17 m, where 1 − Math.cos(θ) is 0 in double precision. Tolerance 1e-12 relative.
    expect(Math.abs(cosineErrorM({ lengthM: 1, misalignmentRad: 1e-7 }) / 5e-15 - 1)).toBeLessThan(1e-12);
    expect(1 - Math.cos(1e-8)).toBe(0);
    expect(Math.abs(cosineErrorM({ lengthM: 1, misalignmentRad: 1e-8 }) / 5e-17 - 1)).toBeLessThan(1e-12);
  });

  it('is even in the angle and rejects angles of π/2 or more', () => {
    fc.assert(
      fc.property(fc.double({ min: -1.5, max: 1.5, noNaN: true }), (angle) => {
        expect(cosineErrorM({ lengthM: 2, misalignmentRad: angle })).toBe(cosineErrorM({ lengthM: 2, misalignmentRad: -angle }));
        expect(cosineErrorM({ lengthM: 2, misalignmentRad: angle })).toBeCloseTo(2 * (1 - Math.cos(angle)), 12);
      }),
    );
    expect(() => cosineErrorM({ lengthM: 1, misalignmentRad: 2 })).toThrow(/misalignmentRad must be smaller than π\/2/);
  });
});
