// Periodic (nonlinearity) error of the phase: binned against the fringe phase, with its first and second
// harmonics, peak-to-peak and RMS. Also a trend remover that separates the periodic error from smooth motion
// (constant-velocity assumption: a low-bandwidth tracking loop follows the motion, not the fringe-rate error).

import { integerInRange, numberInRange, positiveFinite } from './options.js';
import { TWO_PI } from './phase.js';

export interface PeriodicErrorSummary {
  /** Samples that entered the bins. */
  readonly samples: number;
  /** Share of the bins that hold samples, 0..1. */
  readonly binCoverage: number;
  /** Amplitudes of the once- and twice-per-fringe components, rad. */
  readonly firstHarmonicRad: number;
  readonly secondHarmonicRad: number;
  /** Of the binned mean error (noise averages out): peak-to-peak and RMS about its mean, rad. */
  readonly peakToPeakRad: number;
  readonly rmsRad: number;
}

export interface PeriodicErrorAnalyzer {
  /** Adds errors (rad) at the given fringe phases (rad, any range); samples with weight 0 or non-finite values are left out. */
  add(phaseRad: ArrayLike<number>, errorRad: ArrayLike<number>, length: number, use?: ArrayLike<number>): void;
  summary(): PeriodicErrorSummary;
  reset(): void;
}

export function createPeriodicErrorAnalyzer(options: { readonly bins?: number } = {}): PeriodicErrorAnalyzer {
  const bins = integerInRange('bins', options.bins ?? 64, 8, 4096);
  const sums = new Float64Array(bins);
  const counts = new Float64Array(bins);
  const binPerRad = bins / TWO_PI;

  function add(phaseRad: ArrayLike<number>, errorRad: ArrayLike<number>, length: number, use?: ArrayLike<number>): void {
    for (let i = 0; i < length; i++) {
      if (use !== undefined && !use[i]) continue;
      const phase = phaseRad[i]!;
      const error = errorRad[i]!;
      if (!(Number.isFinite(phase) && Number.isFinite(error))) continue;
      const wrapped = phase - TWO_PI * Math.floor(phase / TWO_PI);
      const bin = Math.min(bins - 1, Math.floor(wrapped * binPerRad));
      sums[bin] = sums[bin]! + error;
      counts[bin] = counts[bin]! + 1;
    }
  }

  function summary(): PeriodicErrorSummary {
    let samples = 0;
    let filled = 0;
    let mean = 0;
    for (let b = 0; b < bins; b++) {
      samples += counts[b]!;
      if (counts[b]! > 0) {
        filled++;
        mean += sums[b]! / counts[b]!;
      }
    }
    if (filled === 0) return { samples, binCoverage: 0, firstHarmonicRad: NaN, secondHarmonicRad: NaN, peakToPeakRad: NaN, rmsRad: NaN };
    mean /= filled;
    let low = Infinity;
    let high = -Infinity;
    let squares = 0;
    let re1 = 0, im1 = 0, re2 = 0, im2 = 0;
    for (let b = 0; b < bins; b++) {
      if (counts[b]! === 0) continue;
      const value = sums[b]! / counts[b]! - mean;
      low = Math.min(low, value);
      high = Math.max(high, value);
      squares += value * value;
      const centre = ((b + 0.5) / bins) * TWO_PI;
      re1 += value * Math.cos(centre);
      im1 += value * Math.sin(centre);
      re2 += value * Math.cos(2 * centre);
      im2 += value * Math.sin(2 * centre);
    }
    // Averaging over a bin of width w scales harmonic k by sinc(k·w/2); undo it.
    const halfWidth = Math.PI / bins;
    const gain = (k: number) => Math.sin(k * halfWidth) / (k * halfWidth);
    return {
      samples,
      binCoverage: filled / bins,
      firstHarmonicRad: ((2 / filled) * Math.hypot(re1, im1)) / gain(1),
      secondHarmonicRad: ((2 / filled) * Math.hypot(re2, im2)) / gain(2),
      peakToPeakRad: high - low,
      rmsRad: Math.sqrt(squares / filled),
    };
  }

  return {
    add,
    summary,
    reset() {
      sums.fill(0);
      counts.fill(0);
    },
  };
}

export interface TrendRemoverOptions {
  readonly rateHz: number;
  /** Bandwidth of the loop that follows the motion, Hz. Default rateHz/2000; range (0, rateHz/20]. */
  readonly bandwidthHz?: number;
}

export interface TrendRemover {
  /**
   * From the unwrapped phase (rad) writes what the smooth motion does not explain (rad), and 1 in `use` where
   * the fringe rate is at least 10× the loop bandwidth and the loop has settled, so the periodic error passes
   * through unattenuated; else 0.
   */
  process(unwrappedPhaseRad: ArrayLike<number>, residualRad: Float64Array, use: Uint8Array, length: number): number;
  reset(): void;
}

export function createTrendRemover(options: TrendRemoverOptions): TrendRemover {
  const rateHz = positiveFinite('rateHz', options.rateHz);
  const bandwidthHz = numberInRange('bandwidthHz', options.bandwidthHz ?? rateHz / 2000, 0, rateHz / 20, true);
  const omegaT = (TWO_PI * bandwidthHz) / rateHz;
  const alpha = Math.SQRT2 * omegaT;
  const beta = omegaT * omegaT;
  const minStep = 10 * omegaT;
  const settleSamples = Math.ceil(10 / omegaT);
  let started = false;
  let estimate = 0;
  let step = 0;
  let seen = 0;

  return {
    process(unwrappedPhaseRad, residualRad, use, length) {
      for (let i = 0; i < length; i++) {
        const phase = unwrappedPhaseRad[i]!;
        if (!started) {
          started = true;
          estimate = phase;
        }
        const predicted = estimate + step;
        const residual = phase - predicted;
        estimate = predicted + alpha * residual;
        step += beta * residual;
        residualRad[i] = phase - estimate;
        seen++;
        use[i] = seen > settleSamples && Math.abs(step) >= minStep ? 1 : 0;
      }
      return length;
    },
    reset() {
      started = false;
      estimate = 0;
      step = 0;
      seen = 0;
    },
  };
}
