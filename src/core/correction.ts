// Heydemann correction: precomputed coefficients that map raw (x, y) onto the unit circle.

import type { EllipseCalibration } from './fit/ellipse.js';
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
  /** u = c[0]·x + c[1], v = c[2]·x + c[3]·y + c[4]: the coefficients in use, for accelerated front ends (read-only). */
  readonly coefficients: Float64Array;
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

/** Writes [ux, u0, vx, vy, v0] with u = ux·x + u0, v = vx·x + vy·y + v0 mapping the ellipse onto the unit circle. */
export function correctionCoefficients(calibration: EllipseCalibration | null, out: Float64Array): Float64Array {
  if (calibration === null) {
    out.set([1, 0, 0, 1, 0]);
    return out;
  }
  const { offsetX, offsetY, amplitudeX, amplitudeY, phaseErrorRad } = calibration;
  const tanE = Math.tan(phaseErrorRad);
  const secE = 1 / Math.cos(phaseErrorRad);
  out[0] = 1 / amplitudeX;
  out[1] = -offsetX / amplitudeX;
  out[2] = -tanE / amplitudeX;
  out[3] = secE / amplitudeY;
  out[4] = (offsetX * tanE) / amplitudeX - (offsetY * secE) / amplitudeY;
  return out;
}

export function createCorrection(options: CorrectionOptions = {}): Correction {
  let calibration: EllipseCalibration | null = null;
  // u = ux·x + u0;  v = vx·x + vy·y + v0  (inverse of x = aX cos φ + oX, y = aY sin(φ + e) + oY)
  const coefficients = new Float64Array(5);

  function updateCoefficients(): void {
    correctionCoefficients(calibration, coefficients);
  }

  function setCalibration(next: EllipseCalibration | null): void {
    calibration = next === null ? null : validateCalibration(next);
    updateCoefficients();
  }

  function process(x: ArrayLike<number>, y: ArrayLike<number>, u: Float64Array, v: Float64Array, length: number): number {
    const kux = coefficients[0]!, ku0 = coefficients[1]!, kvx = coefficients[2]!, kvy = coefficients[3]!, kv0 = coefficients[4]!;
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
    coefficients,
    // The correction holds no signal state; reset keeps the calibration, as for every stage.
    reset() {},
  };
}
