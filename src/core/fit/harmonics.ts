// Correction beyond the ellipse: the periodic phase error that no conic removes (a ghost beam making extra passes, a
// detector nonlinearity) estimated as harmonics of the corrected phase, and taken off the measured phase.
//
// Model: the ellipse-corrected phase is φ_m = φ + e(φ), e(φ) = Σ_k a_k cos kφ + b_k sin kφ, k = 1..N. A ghost beam
// that adds g·e^{i(kφ+θ)} to the detected e^{iφ} gives e ≈ g·sin((k−1)φ + θ) (Wu & Deslattes, Appl. Opt. 37(28),
// 1998; for homodyne multi-order ghost reflections see docs/references.md), which is of this form.
//
// Estimation assumption, stated and checked: during the calibration move the true phase is a smooth function of
// time, a cubic over the whole move (a move at steady velocity, or one that speeds up or slows down gently), and
// the move spans at least `minFringes` fringes, so that the harmonics of the phase (which oscillate once per fringe
// and faster) cannot be mistaken for the motion. Then φ_m(t) = c0 + c1·s + c2·s² + c3·s³ + e(φ_m) (s the time
// scaled to [−1, 1]; e evaluated at φ_m, which differs from φ by a second-order term) is linear in its unknowns and
// is solved by least squares from running sums of constant size. The check: the RMS of what that model leaves
// must stay under `maxResidualRad` (the motion was smooth) and the coefficients must be determined (enough fringes).

import { integerInRange, numberInRange, positiveFinite } from '../options.js';
import { choleskyInPlace } from './numerics.js';
import { DEFAULT_MAX_MOTION_RESIDUAL_RAD } from '../periodic-error.js';

/** Highest order the correction supports. */
export const MAX_HARMONIC_ORDER = 8;
const POLYNOMIAL_TERMS = 4;

/** Harmonic coefficients of the phase error e(φ) = Σ cos[k−1]·cos kφ + sin[k−1]·sin kφ, rad. */
export interface PhaseHarmonics {
  readonly cos: readonly number[];
  readonly sin: readonly number[];
}

export interface HarmonicEstimatorOptions {
  /** Highest order estimated, N. Integer 1..8. Required. */
  readonly orders: number;
  /** Samples in the calibration move, which scales time to [−1, 1] for a well-conditioned fit. Integer ≥ 16. Required. */
  readonly totalSamples: number;
  /** Fewest fringes the move must span. Default 100; number ≥ 1. */
  readonly minFringes?: number;
  /** Largest accepted RMS of what the smooth-motion model leaves, rad. Default 0.05 (2.5 nm at 633 nm, fold 2). */
  readonly maxResidualRad?: number;
}

export type HarmonicEstimate =
  | {
      readonly ok: true;
      readonly harmonics: PhaseHarmonics;
      /** Fringes the move spanned, the RMS the model left (rad), and the samples used. */
      readonly fringes: number;
      readonly residualRmsRad: number;
      readonly samples: number;
    }
  | { readonly ok: false; readonly reason: 'too-few-fringes' | 'not-smooth' | 'singular'; readonly message: string; readonly fringes: number; readonly residualRmsRad: number };

export interface HarmonicEstimator {
  /** Adds unwrapped, ellipse-corrected phases (rad) of consecutive samples; `use[i]` 0 leaves a sample out (it still counts in time). */
  add(unwrappedPhaseRad: ArrayLike<number>, length: number, use?: ArrayLike<number>): void;
  solve(): HarmonicEstimate;
  reset(): void;
}

export function createHarmonicEstimator(options: HarmonicEstimatorOptions): HarmonicEstimator {
  const orders = integerInRange('orders', options.orders, 1, MAX_HARMONIC_ORDER);
  const totalSamples = integerInRange('totalSamples', options.totalSamples, 16, 2 ** 53 - 1);
  const minFringes = numberInRange('minFringes', options.minFringes ?? 100, 1, Infinity);
  const maxResidualRad = positiveFinite('maxResidualRad', options.maxResidualRad ?? DEFAULT_MAX_MOTION_RESIDUAL_RAD);
  const unknowns = POLYNOMIAL_TERMS + 2 * orders;
  const normal = new Float64Array(unknowns * unknowns);
  const rhs = new Float64Array(unknowns);
  const row = new Float64Array(unknowns);
  const factor = new Float64Array(unknowns * unknowns);
  const solution = new Float64Array(unknowns);
  let sumSquares = 0; // Σ φ_m², about the first phase, for the residual
  let origin = NaN;
  let index = 0;
  let samples = 0;
  let lowPhase = Infinity;
  let highPhase = -Infinity;

  function add(unwrappedPhaseRad: ArrayLike<number>, length: number, use?: ArrayLike<number>): void {
    for (let i = 0; i < length; i++, index++) {
      const phase = unwrappedPhaseRad[i]!;
      if ((use !== undefined && !use[i]) || !Number.isFinite(phase)) continue;
      if (origin !== origin) origin = phase;
      const y = phase - origin;
      const s = (2 * index) / (totalSamples - 1) - 1;
      row[0] = 1;
      row[1] = s;
      row[2] = s * s;
      row[3] = s * s * s;
      const c1 = Math.cos(phase);
      const s1 = Math.sin(phase);
      let ck = 1;
      let sk = 0;
      for (let k = 0; k < orders; k++) {
        const next = ck * c1 - sk * s1;
        sk = sk * c1 + ck * s1;
        ck = next;
        row[POLYNOMIAL_TERMS + 2 * k] = ck;
        row[POLYNOMIAL_TERMS + 2 * k + 1] = sk;
      }
      for (let r = 0; r < unknowns; r++) {
        const value = row[r]!;
        rhs[r] += value * y;
        for (let c = 0; c <= r; c++) normal[r * unknowns + c] += value * row[c]!;
      }
      sumSquares += y * y;
      samples++;
      if (y < lowPhase) lowPhase = y;
      if (y > highPhase) highPhase = y;
    }
  }

  function solve(): HarmonicEstimate {
    const fringes = samples > 0 ? (highPhase - lowPhase) / (2 * Math.PI) : 0;
    if (!(fringes >= minFringes)) {
      return {
        ok: false,
        reason: 'too-few-fringes',
        message: `the move spans ${fringes.toFixed(1)} fringes; the harmonic correction needs a smooth move over at least ${minFringes}, so that the motion cannot be taken for the periodic error`,
        fringes,
        residualRmsRad: NaN,
      };
    }
    for (let r = 0; r < unknowns; r++) for (let c = 0; c <= r; c++) factor[r * unknowns + c] = factor[c * unknowns + r] = normal[r * unknowns + c]!;
    if (!choleskyInPlace(factor, unknowns)) {
      return { ok: false, reason: 'singular', message: 'the harmonics cannot be told apart from the motion in this capture (singular fit)', fringes, residualRmsRad: NaN };
    }
    for (let r = 0; r < unknowns; r++) {
      let sum = rhs[r]!;
      for (let k = 0; k < r; k++) sum -= factor[r * unknowns + k]! * solution[k]!;
      solution[r] = sum / factor[r * unknowns + r]!;
    }
    for (let r = unknowns - 1; r >= 0; r--) {
      let sum = solution[r]!;
      for (let k = r + 1; k < unknowns; k++) sum -= factor[k * unknowns + r]! * solution[k]!;
      solution[r] = sum / factor[r * unknowns + r]!;
    }
    // Least squares: Σ residual² = Σ y² − θᵀ(Xᵀy).
    let explained = 0;
    for (let r = 0; r < unknowns; r++) explained += solution[r]! * rhs[r]!;
    const residualRmsRad = Math.sqrt(Math.max(0, sumSquares - explained) / samples);
    if (!(residualRmsRad <= maxResidualRad)) {
      return {
        ok: false,
        reason: 'not-smooth',
        message: `the move is not smooth enough for the harmonic correction: a cubic in time plus harmonics leaves ${residualRmsRad.toFixed(4)} rad RMS (limit ${maxResidualRad}); calibrate on a move at steady velocity`,
        fringes,
        residualRmsRad,
      };
    }
    const cos: number[] = [];
    const sin: number[] = [];
    for (let k = 0; k < orders; k++) {
      cos.push(solution[POLYNOMIAL_TERMS + 2 * k]!);
      sin.push(solution[POLYNOMIAL_TERMS + 2 * k + 1]!);
    }
    return { ok: true, harmonics: { cos, sin }, fringes, residualRmsRad, samples };
  }

  function reset(): void {
    normal.fill(0);
    rhs.fill(0);
    sumSquares = 0;
    origin = NaN;
    index = 0;
    samples = 0;
    lowPhase = Infinity;
    highPhase = -Infinity;
  }

  reset();
  return { add, solve, reset };
}

export interface HarmonicCorrection {
  /**
   * Takes the phase error off unwrapped, ellipse-corrected phases in place, and the same error (times metresPerRad)
   * off the positions when given. The error is evaluated at the corrected phase by two fixed-point steps
   * (φ = φ_m − e(φ)); e is small, so each step gains a factor of about its slope. Never allocates.
   */
  process(unwrappedPhaseRad: Float64Array, length: number, positionM?: Float64Array, metresPerRad?: number): void;
  readonly harmonics: PhaseHarmonics;
}

export function createHarmonicCorrection(harmonics: PhaseHarmonics): HarmonicCorrection {
  const orders = harmonics.cos.length;
  integerInRange('harmonics.cos.length', orders, 1, MAX_HARMONIC_ORDER);
  if (harmonics.sin.length !== orders) integerInRange('harmonics.sin.length', harmonics.sin.length, orders, orders);
  const a = Float64Array.from(harmonics.cos, (value, k) => {
    if (!Number.isFinite(value) || Math.abs(value) > 0.5) numberInRange(`harmonics.cos[${k}]`, value, -0.5, 0.5);
    return value;
  });
  const b = Float64Array.from(harmonics.sin, (value, k) => {
    if (!Number.isFinite(value) || Math.abs(value) > 0.5) numberInRange(`harmonics.sin[${k}]`, value, -0.5, 0.5);
    return value;
  });
  const frozen = Object.freeze({ cos: Object.freeze(Array.from(a)), sin: Object.freeze(Array.from(b)) });

  function error(phase: number): number {
    const c1 = Math.cos(phase);
    const s1 = Math.sin(phase);
    let ck = 1;
    let sk = 0;
    let e = 0;
    for (let k = 0; k < orders; k++) {
      const next = ck * c1 - sk * s1;
      sk = sk * c1 + ck * s1;
      ck = next;
      e += a[k]! * ck + b[k]! * sk;
    }
    return e;
  }

  function process(unwrappedPhaseRad: Float64Array, length: number, positionM?: Float64Array, metresPerRad = 0): void {
    for (let i = 0; i < length; i++) {
      const measured = unwrappedPhaseRad[i]!;
      if (!Number.isFinite(measured)) continue;
      const first = error(measured);
      const e = error(measured - first);
      unwrappedPhaseRad[i] = measured - e;
      if (positionM !== undefined) positionM[i] -= e * metresPerRad;
    }
  }

  return { process, harmonics: frozen };
}
