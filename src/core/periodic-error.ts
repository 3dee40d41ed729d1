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
  /** Mean error per phase bin (rad), bin b covering [2πb/bins, 2π(b+1)/bins); NaN where empty. */
  binnedMeanRad(): Float64Array;
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
      sums[bin] += error;
      counts[bin] += 1;
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
    binnedMeanRad() {
      return sums.map((sum, b) => (counts[b]! > 0 ? sum / counts[b]! : NaN));
    },
    reset() {
      sums.fill(0);
      counts.fill(0);
    },
  };
}

export interface WindowDetrenderOptions {
  /** Samples per window. Default 256; integer 16..65536. */
  readonly windowSamples?: number;
  /** A window is used only if the motion spans at least this many fringes in it. Default 3. */
  readonly minFringes?: number;
  /**
   * A window is used only if smooth motion explains it to within this RMS residual, rad: a move that starts
   * or stops inside the window does not pass. Default 0.05 (about 2.5 nm at 633 nm, fold 2).
   */
  readonly maxResidualRad?: number;
}

export interface WindowDetrender {
  /**
   * Takes the unwrapped phase (rad) and a 0/1 mask of trustworthy samples; each full window of steady motion with
   * no masked sample is fitted with a cubic in time, and its residuals (what smooth motion does not explain:
   * the periodic error and noise) go into the analyzer at their phases.
   */
  process(unwrappedPhaseRad: ArrayLike<number>, valid: ArrayLike<number>, length: number): void;
  /** Windows fitted and windows used. */
  readonly windows: { readonly fitted: number; readonly used: number };
  reset(): void;
}

/**
 * Residual periodic error from the data alone, on the common-practice assumption that the stage moves smoothly:
 * a cubic in time over a window of several fringes follows the motion (even vibration) but not the fringe-rate error.
 */
export function createWindowDetrender(analyzer: PeriodicErrorAnalyzer, options: WindowDetrenderOptions = {}): WindowDetrender {
  const size = integerInRange('windowSamples', options.windowSamples ?? 256, 16, 65536);
  const minTravelRad = TWO_PI * numberInRange('minFringes', options.minFringes ?? 3, 0, 1e9);
  const maxResidualRad = positiveFinite('maxResidualRad', options.maxResidualRad ?? 0.05);
  const phase = new Float64Array(size);
  const residual = new Float64Array(size);
  let filled = 0;
  let clean = true;
  let fitted = 0;
  let used = 0;
  // Sums of t^k over t = j − (size − 1)/2: the odd ones vanish, so even and odd coefficients solve apart.
  let s2 = 0;
  let s4 = 0;
  let s6 = 0;
  for (let j = 0; j < size; j++) {
    const t = j - (size - 1) / 2;
    s2 += t ** 2;
    s4 += t ** 4;
    s6 += t ** 6;
  }
  const half = (size - 1) / 2;
  const evenDeterminant = size * s4 - s2 * s2;
  const oddDeterminant = s2 * s6 - s4 * s4;

  function fitWindow(): void {
    fitted++;
    const origin = phase[0]!;
    let p0 = 0, p1 = 0, p2 = 0, p3 = 0;
    for (let j = 0; j < size; j++) {
      const t = j - half;
      const value = phase[j]! - origin;
      p0 += value;
      p1 += value * t;
      p2 += value * t * t;
      p3 += value * t * t * t;
    }
    const c0 = (p0 * s4 - p2 * s2) / evenDeterminant;
    const c2 = (size * p2 - s2 * p0) / evenDeterminant;
    const c1 = (p1 * s6 - p3 * s4) / oddDeterminant;
    const c3 = (s2 * p3 - s4 * p1) / oddDeterminant;
    if (Math.abs(c1) * size < minTravelRad) return;
    let squares = 0;
    for (let j = 0; j < size; j++) {
      const t = j - half;
      const r = phase[j]! - origin - (c0 + t * (c1 + t * (c2 + t * c3)));
      residual[j] = r;
      squares += r * r;
    }
    if (Math.sqrt(squares / size) > maxResidualRad) return;
    used++;
    analyzer.add(phase, residual, size);
  }

  return {
    process(unwrappedPhaseRad, valid, length) {
      for (let i = 0; i < length; i++) {
        phase[filled] = unwrappedPhaseRad[i]!;
        if (!valid[i]) clean = false;
        if (++filled === size) {
          if (clean) fitWindow();
          filled = 0;
          clean = true;
        }
      }
    },
    get windows() {
      return { fitted, used };
    },
    reset() {
      filled = 0;
      clean = true;
      fitted = 0;
      used = 0;
    },
  };
}
