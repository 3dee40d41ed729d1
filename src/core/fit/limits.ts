// What every fit method checks before its ellipse is used: enough samples, a solvable conic, plausible detectors,
// enough of the fringe covered. The one place where a conic solution becomes an `EllipseFitResult`.

import { integerInRange, MAX_COUNT, numberInRange } from '../options.js';
import { calibrationOfSolution, type ConicSolver } from './conic-solver.js';
import { coverageOfFit, type AccumulatorState } from './coverage.js';
import type { EllipseCalibration, EllipseFitResult } from './ellipse.js';

export interface EllipseFitOptions {
  /** Fewest samples a fit accepts. Default 32; integer in 6..2^53. */
  readonly minSamples?: number;
  /**
   * Least equivalent phase coverage accepted, as a fraction of one fringe. Default 0.75 (common practice:
   * about one full fringe of motion is needed for a well-conditioned fit); range [0, 1].
   */
  readonly minCoverage?: number;
  /** Largest accepted amplitude ratio max(aX/aY, aY/aX); beyond it the optics, not the fit, need fixing. Default 4; range [1, 100]. */
  readonly maxAmplitudeRatio?: number;
  /**
   * Largest accepted |phaseErrorRad|. Default 7π/18 (70°): the correction divides the quadrature signal by
   * cos(phaseErrorRad), so phase noise grows by 1/cos e (2.9× at 70°, 1.4× at 45°); three-output detectors
   * routinely give pairs beyond 45°. Range (0, π/2].
   */
  readonly maxPhaseErrorRad?: number;
}

/** Limits every fit method applies to its result (see `EllipseFitOptions`). */
export interface FitLimits {
  readonly minSamples: number;
  readonly minCoverage: number;
  readonly maxAmplitudeRatio: number;
  readonly maxPhaseErrorRad: number;
}

/** Validates the limits of `EllipseFitOptions` once, with their defaults. */
export function resolveFitLimits(options: EllipseFitOptions): FitLimits {
  const minSamples = integerInRange('minSamples', options.minSamples ?? 32, 6, MAX_COUNT);
  const minCoverage = numberInRange('minCoverage', options.minCoverage ?? 0.75, 0, 1);
  const maxAmplitudeRatio = numberInRange('maxAmplitudeRatio', options.maxAmplitudeRatio ?? 4, 1, 100);
  const maxPhaseErrorRad = numberInRange('maxPhaseErrorRad', options.maxPhaseErrorRad ?? (7 * Math.PI) / 18, 0, Math.PI / 2, true);
  return { minSamples, minCoverage, maxAmplitudeRatio, maxPhaseErrorRad };
}

/** The last checks of every fit method: plausible detectors, enough coverage. */
export function acceptFit(
  fit: Omit<Extract<EllipseFitResult, { ok: true }>, 'ok' | 'coverage'>,
  coverage: number,
  limits: FitLimits,
): EllipseFitResult {
  const { calibration, samples } = fit;
  const ratio = Math.max(calibration.amplitudeX / calibration.amplitudeY, calibration.amplitudeY / calibration.amplitudeX);
  if (ratio > limits.maxAmplitudeRatio || Math.abs(calibration.phaseErrorRad) > limits.maxPhaseErrorRad) {
    return {
      ok: false,
      reason: 'implausible',
      message: `implausible ellipse: amplitude ratio ${ratio.toFixed(3)} (limit ${limits.maxAmplitudeRatio}), phase error ${calibration.phaseErrorRad.toFixed(4)} rad (limit ±${limits.maxPhaseErrorRad.toFixed(4)})`,
      samples,
      calibration,
      coverage,
    };
  }
  if (coverage < limits.minCoverage) {
    return {
      ok: false,
      reason: 'low-coverage',
      message: `phase coverage ${coverage.toFixed(3)} of a fringe is below the minimum ${limits.minCoverage}`,
      samples,
      coverage,
    };
  }
  return { ok: true, ...fit, coverage };
}


/** Solves an accumulator's sums with `solver` and checks the result against `limits`. */
export function fitResult(solver: ConicSolver, state: AccumulatorState, limits: FitLimits): EllipseFitResult {
  const { shiftX, shiftY, moments } = state;
  const samples = moments[0]!;
  const fail = (reason: 'too-few-samples' | 'degenerate' | 'not-an-ellipse', message: string): EllipseFitResult =>
    ({ ok: false, reason, message, samples, coverage: NaN });
  if (samples < limits.minSamples) return fail('too-few-samples', `too few samples: ${samples} < ${limits.minSamples}`);
  const solution = solver.solve(moments);
  const { status } = solution;
  if (status !== 'ok') {
    return fail(status, status === 'degenerate' ? 'samples on a line or a point: singular fit' : 'not an ellipse: too little of the figure covered, or not quadrature');
  }
  const calibration = calibrationOfSolution(solution, shiftX, shiftY);
  return acceptFit(
    {
      calibration,
      residualRms: solution.residualRms,
      samples,
      conic: { A: solution.A, B: solution.B, C: solution.C, D: solution.D, E: solution.E },
      frame: { centreX: shiftX + solution.centreU, centreY: shiftY + solution.centreV, scale: solution.scale },
    },
    coverageOfFit(state, calibration),
    limits,
  );
}

/** Quadrature error beyond which a fit is accepted with a warning: the phase noise grows by 1/cos e ≥ √2. */
export const WARN_PHASE_ERROR_RAD = Math.PI / 4;

/** Plain-words warnings about an accepted ellipse that the measurement will pay for (empty when none). */
export function fitWarnings(calibration: EllipseCalibration): string[] {
  const warnings: string[] = [];
  const e = calibration.phaseErrorRad;
  if (Math.abs(e) > WARN_PHASE_ERROR_RAD) {
    warnings.push(
      `quadrature error ${((e * 180) / Math.PI).toFixed(1)}° is beyond ±45°: the correction multiplies phase noise by ` +
        `1/cos e = ${(1 / Math.cos(e)).toFixed(2)}; detectors nearer 90° apart would measure with less noise`,
    );
  }
  return warnings;
}

/** Which limit refused an 'implausible' fit, by the option name of `EllipseFitOptions`. */
export function exceededLimits(calibration: EllipseCalibration, limits: FitLimits): Array<'maxAmplitudeRatio' | 'maxPhaseErrorRad'> {
  const ratio = Math.max(calibration.amplitudeX / calibration.amplitudeY, calibration.amplitudeY / calibration.amplitudeX);
  const exceeded: Array<'maxAmplitudeRatio' | 'maxPhaseErrorRad'> = [];
  if (ratio > limits.maxAmplitudeRatio) exceeded.push('maxAmplitudeRatio');
  if (Math.abs(calibration.phaseErrorRad) > limits.maxPhaseErrorRad) exceeded.push('maxPhaseErrorRad');
  return exceeded;
}
