// Drift-tracking ellipse correction: recursive least squares with exponential forgetting, in information form.
// The conic model is linear in its coefficients, so exponentially weighted moment sums (decayed by λ per sample)
// hold exactly what covariance-form RLS holds; solving them at checkpoints gives the same estimate without RLS's
// covariance windup while the stage stands still, and lets the bias-reduced fits run online (conic-solver.ts).
// Online ellipse compensation after Eom, Kim & Jeong, Meas. Sci. Technol. 12 (2001) (memory).

import { correctionCoefficients, validateCalibration } from '../correction.js';
import { integerInRange, numberInRange, oneOf, OptionError } from '../options.js';
import { fastAtan2, TWO_PI, wrapPhase } from '../phase.js';
import { createConicSolver, DEFAULT_ELLIPSE_FIT_METHOD, ELLIPSE_FIT_METHODS, type EllipseFitMethod } from './conic-solver.js';
import type { EllipseCalibration } from './ellipse.js';
import { MOMENT_COUNT } from './moments.js';

export interface OnlineCorrectionOptions {
  /** Starting ellipse, e.g. from a batch fit; also fixes the origin the sums are kept about. Required. */
  readonly calibration: EllipseCalibration;
  /** Memory of the forgetting, in samples: each sample's weight decays by λ = 1 − 1/forgettingSamples. Default 8192; number >= 100. */
  readonly forgettingSamples?: number;
  /** Least share of the 36 phase bins (10° each) reached within the last `coverageWindowSamples` for an update. Default 0.9; range [0.25, 1]. */
  readonly minCoverage?: number;
  /** How far back "recently covered" reaches, samples. Default forgettingSamples; integer >= 64. */
  readonly coverageWindowSamples?: number;
  /** Samples between update attempts. Default 1024; integer in 16..2^31. */
  readonly updateIntervalSamples?: number;
  /** Samples over which the phase offset carried at an update is blended out. Default 1024; integer in 1..2^31. */
  readonly blendSamples?: number;
  /** Fit solved at each checkpoint. Default 'hyper'. */
  readonly method?: EllipseFitMethod;
  /**
   * Largest accepted change of an update, relative to the radius: offsets, amplitudes and phase error (rad) each
   * move by at most this much; a larger change means the signal, not the ellipse, changed. Default 0.05; (0, 1].
   */
  readonly maxChange?: number;
}

export interface OnlineCorrectionStatus {
  /** Samples processed since construction or reset. */
  readonly samples: number;
  /** Calibrations taken over, and update attempts refused (low coverage, failed fit, implausible change). */
  readonly updates: number;
  readonly refused: number;
  /** Recent coverage at the last attempt, 0..1 (NaN before the first). */
  readonly coverage: number;
  /** Phase offset (rad) carried at the last update so the output stayed continuous; blended out afterwards. */
  readonly lastUpdateOffsetRad: number;
  /** Absolute index of the sample after which the last update took effect (−1: none). */
  readonly lastUpdateSampleIndex: number;
}

export interface OnlineCorrection {
  /**
   * Like `Correction.process`: writes u = cos φ, v = sin φ for `length` samples, with the current calibration and
   * any blend of the last update; learns the ellipse from the same samples. Never allocates or throws.
   */
  process(x: ArrayLike<number>, y: ArrayLike<number>, u: Float64Array, v: Float64Array, length: number): number;
  /** The calibration in use (a fresh record per read). */
  readonly calibration: EllipseCalibration;
  readonly status: OnlineCorrectionStatus;
  /** Forgets what was learnt and returns to the starting calibration. */
  reset(): void;
}

const COVERAGE_BINS = 36;

export function createOnlineCorrection(options: OnlineCorrectionOptions): OnlineCorrection {
  if (options === null || typeof options !== 'object' || options.calibration === undefined) {
    throw new OptionError('calibration', 'an ellipse calibration record (the starting ellipse)', options?.calibration);
  }
  const initial = validateCalibration(options.calibration);
  const forgettingSamples = options.forgettingSamples ?? 8192;
  if (typeof forgettingSamples !== 'number' || !Number.isFinite(forgettingSamples) || forgettingSamples < 100) {
    throw new OptionError('forgettingSamples', 'a number >= 100', forgettingSamples);
  }
  const minCoverage = numberInRange('minCoverage', options.minCoverage ?? 0.9, 0.25, 1);
  const coverageWindow = integerInRange('coverageWindowSamples', options.coverageWindowSamples ?? Math.round(forgettingSamples), 64, 2 ** 31);
  const updateInterval = integerInRange('updateIntervalSamples', options.updateIntervalSamples ?? 1024, 16, 2 ** 31);
  const blendSamples = integerInRange('blendSamples', options.blendSamples ?? 1024, 1, 2 ** 31);
  const method = oneOf('method', options.method ?? DEFAULT_ELLIPSE_FIT_METHOD, ELLIPSE_FIT_METHODS);
  const maxChange = numberInRange('maxChange', options.maxChange ?? 0.05, 0, 1, true);
  const lambda = 1 - 1 / forgettingSamples;
  // A solve needs the memory mostly filled: half the asymptotic weight Σλ^k = forgettingSamples.
  const minWeight = forgettingSamples / 2;

  const solver = createConicSolver(method);
  const sums = new Float64Array(MOMENT_COUNT);
  const lastSeen = new Float64Array(COVERAGE_BINS);
  // Sums are kept about the starting centre, so the powers stay near the signal's own size as it drifts.
  const originX = initial.offsetX;
  const originY = initial.offsetY;

  let offsetX = 0, offsetY = 0, amplitudeX = 1, amplitudeY = 1, phaseErrorRad = 0;
  let ux = 1, u0 = 0, vx = 0, vy = 1, v0 = 0;
  let samples = 0, updates = 0, refused = 0, coverage = NaN;
  let sinceAttempt = 0;
  let blendAngle = 0, blendLeft = 0;
  let lastUpdateOffsetRad = 0, lastUpdateSampleIndex = -1;

  const coefficients = new Float64Array(5);
  /** The correction coefficients, derived as the correction stage derives them. */
  function updateCoefficients(): void {
    correctionCoefficients({ offsetX, offsetY, amplitudeX, amplitudeY, phaseErrorRad }, coefficients);
    ux = coefficients[0]!;
    u0 = coefficients[1]!;
    vx = coefficients[2]!;
    vy = coefficients[3]!;
    v0 = coefficients[4]!;
  }

  function recentCoverage(): number {
    let reached = 0;
    for (let bin = 0; bin < COVERAGE_BINS; bin++) if (samples - lastSeen[bin]! <= coverageWindow) reached++;
    return reached / COVERAGE_BINS;
  }

  /** Tries to take over the fitted ellipse after sample (x, y), whose output phase was `outputPhase`. */
  function attemptUpdate(x: number, y: number, outputPhase: number): void {
    coverage = recentCoverage();
    if (coverage < minCoverage || sums[0]! < minWeight) {
      refused++;
      return;
    }
    const s = solver.solve(sums);
    if (s.status !== 'ok') {
      refused++;
      return;
    }
    const nextOffsetX = originX + s.centreU + s.scale * s.p;
    const nextOffsetY = originY + s.centreV + s.scale * s.q;
    const nextAmplitudeX = s.scale * s.R;
    const nextAmplitudeY = nextAmplitudeX / s.G;
    const nextPhaseError = -s.alphaRad;
    const radius = 0.5 * (amplitudeX + amplitudeY);
    if (
      !(Math.abs(nextOffsetX - offsetX) <= maxChange * radius &&
        Math.abs(nextOffsetY - offsetY) <= maxChange * radius &&
        Math.abs(nextAmplitudeX - amplitudeX) <= maxChange * amplitudeX &&
        Math.abs(nextAmplitudeY - amplitudeY) <= maxChange * amplitudeY &&
        Math.abs(nextPhaseError - phaseErrorRad) <= maxChange)
    ) {
      refused++;
      return;
    }
    offsetX = nextOffsetX;
    offsetY = nextOffsetY;
    amplitudeX = nextAmplitudeX;
    amplitudeY = nextAmplitudeY;
    phaseErrorRad = nextPhaseError;
    updateCoefficients();
    // Bumpless transfer: carry the difference between the phase just reported and the new correction's phase of
    // the same sample, then blend it out, so the position neither jumps nor keeps a permanent offset.
    const newPhase = fastAtan2(vx * x + vy * y + v0, ux * x + u0);
    blendAngle = wrapPhase(outputPhase - newPhase);
    blendLeft = blendSamples;
    lastUpdateOffsetRad = blendAngle;
    lastUpdateSampleIndex = samples - 1;
    updates++;
  }

  function process(x: ArrayLike<number>, y: ArrayLike<number>, u: Float64Array, v: Float64Array, length: number): number {
    let s00 = sums[0]!, s10 = sums[1]!, s01 = sums[2]!, s20 = sums[3]!, s11 = sums[4]!, s02 = sums[5]!;
    let s30 = sums[6]!, s21 = sums[7]!, s12 = sums[8]!, s03 = sums[9]!;
    let s40 = sums[10]!, s31 = sums[11]!, s22 = sums[12]!, s13 = sums[13]!, s04 = sums[14]!;
    const binPerRad = COVERAGE_BINS / TWO_PI;
    for (let i = 0; i < length; i++) {
      const xi = x[i]!;
      const yi = y[i]!;
      let cu = ux * xi + u0;
      let cv = vx * xi + vy * yi + v0;
      const ownPhase = fastAtan2(cv, cu);
      let outputPhase = ownPhase;
      if (blendLeft > 0) {
        const angle = (blendAngle * blendLeft) / blendSamples;
        const c = Math.cos(angle);
        const sn = Math.sin(angle);
        const rotatedU = c * cu - sn * cv;
        cv = sn * cu + c * cv;
        cu = rotatedU;
        outputPhase = ownPhase + angle;
        blendLeft--;
      }
      u[i] = cu;
      v[i] = cv;
      samples++;
      if (Number.isFinite(xi) && Number.isFinite(yi)) {
        const bin = Math.floor((ownPhase + Math.PI) * binPerRad);
        lastSeen[bin < COVERAGE_BINS ? bin : COVERAGE_BINS - 1] = samples;
        const a = xi - originX;
        const b = yi - originY;
        const aa = a * a, ab = a * b, bb = b * b;
        s00 = lambda * s00 + 1;
        s10 = lambda * s10 + a;
        s01 = lambda * s01 + b;
        s20 = lambda * s20 + aa;
        s11 = lambda * s11 + ab;
        s02 = lambda * s02 + bb;
        s30 = lambda * s30 + aa * a;
        s21 = lambda * s21 + aa * b;
        s12 = lambda * s12 + a * bb;
        s03 = lambda * s03 + bb * b;
        s40 = lambda * s40 + aa * aa;
        s31 = lambda * s31 + aa * ab;
        s22 = lambda * s22 + aa * bb;
        s13 = lambda * s13 + ab * bb;
        s04 = lambda * s04 + bb * bb;
      }
      if (++sinceAttempt >= updateInterval) {
        sinceAttempt = 0;
        sums[0] = s00; sums[1] = s10; sums[2] = s01; sums[3] = s20; sums[4] = s11; sums[5] = s02;
        sums[6] = s30; sums[7] = s21; sums[8] = s12; sums[9] = s03;
        sums[10] = s40; sums[11] = s31; sums[12] = s22; sums[13] = s13; sums[14] = s04;
        if (Number.isFinite(outputPhase)) attemptUpdate(xi, yi, outputPhase);
      }
    }
    sums[0] = s00; sums[1] = s10; sums[2] = s01; sums[3] = s20; sums[4] = s11; sums[5] = s02;
    sums[6] = s30; sums[7] = s21; sums[8] = s12; sums[9] = s03;
    sums[10] = s40; sums[11] = s31; sums[12] = s22; sums[13] = s13; sums[14] = s04;
    return length;
  }

  function reset(): void {
    ({ offsetX, offsetY, amplitudeX, amplitudeY, phaseErrorRad } = initial);
    updateCoefficients();
    sums.fill(0);
    // Bins start "long unseen", so coverage must be earned after a reset.
    lastSeen.fill(-Infinity);
    samples = 0;
    updates = 0;
    refused = 0;
    coverage = NaN;
    sinceAttempt = 0;
    blendAngle = 0;
    blendLeft = 0;
    lastUpdateOffsetRad = 0;
    lastUpdateSampleIndex = -1;
  }

  reset();
  return {
    process,
    get calibration(): EllipseCalibration {
      return { offsetX, offsetY, amplitudeX, amplitudeY, phaseErrorRad };
    },
    get status(): OnlineCorrectionStatus {
      return { samples, updates, refused, coverage, lastUpdateOffsetRad, lastUpdateSampleIndex };
    },
    reset,
  };
}
