// Geometry corrections of an interferometer reading: the dead-path error from an index change since the datum, and
// the cosine error of a beam misaligned with the motion (common practice; Bryan 1979 for the related Abbe principle).
import { OptionError, finiteNumber, positiveFinite } from '../options.js';

export interface DeadPathOptions {
  /** Unmeasured path between the interferometer and the reflector at the datum (zero) position, m, ≥ 0. */
  readonly deadPathM: number;
  /** Refractive index used when the datum was set. */
  readonly indexAtDatum: number;
  /** Refractive index now, the one the reading is compensated with. */
  readonly indexNow: number;
}

/**
 * The correction to add to a reading compensated with `indexNow`, m. The optical path changed by
 * n_now (D + L) − n_datum D, so the reading is L + D (n_now − n_datum) / n_now; the correction is the negative of that
 * last term, about −D Δn.
 */
export function deadPathCorrectionM(options: DeadPathOptions): number {
  const deadPathM = finiteNumber('deadPathM', options.deadPathM);
  if (deadPathM < 0) throw new OptionError('deadPathM', 'a finite number ≥ 0', deadPathM);
  const indexAtDatum = positiveFinite('indexAtDatum', options.indexAtDatum);
  const indexNow = positiveFinite('indexNow', options.indexNow);
  return (-deadPathM * (indexNow - indexAtDatum)) / indexNow;
}

export interface CosineErrorOptions {
  /** Length moved along the axis of motion, m. */
  readonly lengthM: number;
  /** Angle between the beam and the axis of motion, rad, |θ| < π/2. */
  readonly misalignmentRad: number;
}

/**
 * How much shorter the reading is than the motion, m: L (1 − cos θ) ≈ L θ²/2. Computed as 2 L sin²(θ/2), which keeps
 * full precision at the micro-radian angles of a real alignment, where 1 − cos θ cancels to a few digits (to none
 * below about 1e-8 rad).
 */
export function cosineErrorM(options: CosineErrorOptions): number {
  const lengthM = finiteNumber('lengthM', options.lengthM);
  const angle = finiteNumber('misalignmentRad', options.misalignmentRad);
  if (Math.abs(angle) >= Math.PI / 2) {
    throw new OptionError('misalignmentRad', 'smaller than π/2 in magnitude', angle);
  }
  const half = Math.sin(angle / 2);
  return 2 * lengthM * half * half;
}
