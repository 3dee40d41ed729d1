// Heydemann correction: precomputed coefficients that map raw (x, y) onto the unit circle.

import type { EllipseCalibration } from './ellipse.js';
import { finiteNumber, OptionError, positiveFinite } from './options.js';

export interface CorrectionOptions {
  /** The fitted ellipse; omitted or null means identity (u = x, v = y). */
  readonly calibration?: EllipseCalibration | null;
}

export interface Correction {
  /** Writes u = cos φ, v = sin φ (radius 1 on the calibrated ellipse) for `length` samples. Never allocates. */
  process(x: ArrayLike<number>, y: ArrayLike<number>, u: Float64Array, v: Float64Array, length: number): number;
  /** Replaces the calibration (null: identity); coefficients are recomputed at once. */
  setCalibration(calibration: EllipseCalibration | null): void;
  readonly calibration: EllipseCalibration | null;
  reset(): void;
}

/** Checks a calibration record once, with errors that name the field. */
export function validateCalibration(calibration: EllipseCalibration, name = 'calibration'): EllipseCalibration {
  finiteNumber(`${name}.offsetX`, calibration.offsetX);
  finiteNumber(`${name}.offsetY`, calibration.offsetY);
  positiveFinite(`${name}.amplitudeX`, calibration.amplitudeX);
  positiveFinite(`${name}.amplitudeY`, calibration.amplitudeY);
  const e = calibration.phaseErrorRad;
  if (typeof e !== 'number' || !(Math.abs(e) < Math.PI / 2)) {
    throw new OptionError(`${name}.phaseErrorRad`, 'a number in (-π/2, π/2)', e);
  }
  return Object.freeze({ ...calibration });
}

export function createCorrection(options: CorrectionOptions = {}): Correction {
  let calibration: EllipseCalibration | null = null;
  // u = ux·x + u0;  v = vx·x + vy·y + v0  (inverse of x = aX cos φ + oX, y = aY sin(φ + e) + oY)
  let ux = 1, u0 = 0, vx = 0, vy = 1, v0 = 0;

  function updateCoefficients(): void {
    if (calibration === null) {
      ux = 1; u0 = 0; vx = 0; vy = 1; v0 = 0;
      return;
    }
    const { offsetX, offsetY, amplitudeX, amplitudeY, phaseErrorRad } = calibration;
    const tanE = Math.tan(phaseErrorRad);
    const secE = 1 / Math.cos(phaseErrorRad);
    ux = 1 / amplitudeX;
    u0 = -offsetX / amplitudeX;
    vx = -tanE / amplitudeX;
    vy = secE / amplitudeY;
    v0 = (offsetX * tanE) / amplitudeX - (offsetY * secE) / amplitudeY;
  }

  function setCalibration(next: EllipseCalibration | null): void {
    calibration = next === null ? null : validateCalibration(next);
    updateCoefficients();
  }

  function process(x: ArrayLike<number>, y: ArrayLike<number>, u: Float64Array, v: Float64Array, length: number): number {
    const kux = ux, ku0 = u0, kvx = vx, kvy = vy, kv0 = v0;
    for (let i = 0; i < length; i++) {
      const xi = x[i]!;
      u[i] = kux * xi + ku0;
      v[i] = kvx * xi + kvy * y[i]! + kv0;
    }
    return length;
  }

  setCalibration(options.calibration ?? null);
  return {
    process,
    setCalibration,
    get calibration() {
      return calibration;
    },
    // The correction holds no signal state; reset keeps the calibration, as for every stage.
    reset() {},
  };
}
