// What the ellipse misses: the corrected radius against the corrected phase (harmonics of orders 1–8), against
// time (slow drift, with the part locked to the phase removed) and the colour of its noise, in constant memory.
//
// Why the radius: a distortion the conic cannot fit shows in the radius and in the phase together. For a ghost beam,
// the detected signal e^{iφ} + g·e^{i(kφ+θ)} has radius ≈ 1 + g·cos((k−1)φ + θ) and phase error ≈ g·sin((k−1)φ + θ)
// for small g (the model of Wu & Deslattes, Appl. Opt. 37(28), 1998, for ghost reflections; docs/references.md), so a
// radius harmonic of relative amplitude a can mean a phase error of up to a rad at the same order: a·λ/(4π·fold)
// of position. The radius is seen directly; the phase error is not (it hides in the motion), which is why the
// radius is the witness.

import { integerInRange, OptionError } from '../options.js';
import { TWO_PI } from '../phase.js';

/** Radius harmonics reported: orders 1..RESIDUAL_ORDERS of the corrected phase (the analyzer's loop is written out for 8). */
export const RESIDUAL_ORDERS = 8;
/** Octave levels of the noise-colour estimate: averaging times of 1, 2, 4 … 16 samples. */
const NOISE_LEVELS = 5;
/** Fewest differences at the longest averaging time for a slope. */
const MIN_DIFFERENCES = 16;
/** Least share of phase bins with samples for the harmonics (and the drift, which removes them) to be stated. */
const MIN_BIN_COVERAGE = 0.9;

export interface ResidualAnalyzerOptions {
  /** Phase bins of the radius residual. Default 64; integer 32..4096. */
  readonly bins?: number;
  /** Time segments of the radius-over-time series; pairs merge when the capture outgrows them. Default 128; integer 8..4096. */
  readonly segments?: number;
  /**
   * The analysis of a segment's samples (see ResidualRun). Default: this module's loop; src/accel's createResidualRun
   * gives the same doubles faster.
   */
  readonly run?: ResidualRun;
}

/**
 * Analyses samples from..to−1 of (u, v) (those with `use[i]` 0 or a radius not in (0, ∞) left out) as the analyzer's
 * own loop does, sample by sample in order: `state` holds, and is updated in place, the Σ(r − 1) and count per phase
 * bin (bins each), then the noise cascade's previous, has-previous, half, has-half, Σ of squares and differences
 * (NOISE_LEVELS each, has-… as 0 or 1); `sums` receives Σ(r − 1), the samples analysed, Σcos kφ and Σsin kφ for
 * k = 1..RESIDUAL_ORDERS in pairs, and Σr.
 */
export type ResidualRun = (
  u: ArrayLike<number>,
  v: ArrayLike<number>,
  from: number,
  to: number,
  use: ArrayLike<number> | undefined,
  bins: number,
  binPerRad: number,
  state: Float64Array,
  sums: Float64Array,
) => void;

export interface ResidualSummary {
  /** Samples analysed. */
  readonly samples: number;
  /** Share of the phase bins that hold samples, 0..1. */
  readonly binCoverage: number;
  /** Mean corrected radius (1 on the calibration's ellipse). */
  readonly meanRadius: number;
  /** Amplitudes of the radius residual's harmonics of orders 1..8 of the corrected phase, relative to the radius; NaN when under 90 % of the bins hold samples. */
  readonly radiusHarmonics: readonly number[];
  /** Their phases, rad (r − 1 ≈ Σ a_k cos(kφ − phase_k)). */
  readonly radiusHarmonicPhasesRad: readonly number[];
  /**
   * Largest minus smallest mean radius over the time segments, relative to the radius, after removing the part
   * locked to the phase (so a segment that dwells at one phase does not read as drift); NaN as the harmonics.
   */
  readonly radiusDriftRelative: number;
  /** RMS of the radius's sample-to-sample fluctuation, relative to the radius (√ of the Allan variance at one sample). */
  readonly radiusNoiseRms: number;
  /**
   * Spectral slope β of the radius noise (power spectral density ∝ f^β) at averaging times of 1–16 samples, from
   * the slope μ of the Allan variance against averaging time, β = −μ − 1 (Allan, Proc. IEEE 54(2), 1966): 0 for
   * white noise, −1 flicker, −2 random walk (red). NaN with too few samples.
   */
  readonly noiseSpectralSlope: number;
}

export interface RadiusOverTime {
  /** First sample index of each segment, and the number of samples averaged in it. */
  readonly sampleIndex: Float64Array;
  readonly samples: Float64Array;
  /** Mean radius per segment, the part locked to the phase removed (relative, 1 = calibration). */
  readonly meanRadius: Float64Array;
}

export interface ResidualAnalyzer {
  /**
   * Adds corrected samples (u, v on the unit circle for the calibration); samples with `use[i]` 0 or non-finite
   * values are counted in time but not analysed. Never allocates.
   */
  add(u: ArrayLike<number>, v: ArrayLike<number>, length: number, use?: ArrayLike<number>): void;
  /** Lets `length` samples pass unanalysed, exactly as `add` with all of them unused (counted in time only). */
  skip(length: number): void;
  summary(): ResidualSummary;
  /** Mean radius − 1 per phase bin, bin b covering [2πb/bins − π, 2π(b+1)/bins − π); NaN where empty. */
  radiusByPhase(): Float64Array;
  radiusOverTime(): RadiusOverTime;
  reset(): void;
}

export function createResidualAnalyzer(options: ResidualAnalyzerOptions = {}): ResidualAnalyzer {
  const bins = integerInRange('bins', options.bins ?? 64, 32, 4096);
  const segments = integerInRange('segments', options.segments ?? 128, 8, 4096);
  const binPerRad = bins / TWO_PI;
  const runKernel = options.run;
  if (runKernel !== undefined && typeof runKernel !== 'function') throw new OptionError('run', 'a function', runKernel);
  // The state a ResidualRun updates, in one array: per bin Σ(r − 1) and count, then the noise cascade.
  const state = new Float64Array(2 * bins + 6 * NOISE_LEVELS);
  const binSums = state.subarray(0, bins);
  const binCounts = state.subarray(bins, 2 * bins);
  const kernelSums = new Float64Array(3 + 2 * RESIDUAL_ORDERS);
  // Per segment: Σ(r − 1), count, then Σcos kφ and Σsin kφ for k = 1..ORDERS (to remove the phase-locked part later).
  const stride = 2 + 2 * RESIDUAL_ORDERS;
  const segmentSums = new Float64Array(segments * stride);
  // Noise colour: a cascade of pairwise averages; per level the previous average, a pending half and Σ of squared differences.
  const [previous, hasPrevious, half, hasHalf, squares, differences] = [0, 1, 2, 3, 4, 5].map((k) =>
    state.subarray(2 * bins + k * NOISE_LEVELS, 2 * bins + (k + 1) * NOISE_LEVELS),
  ) as [Float64Array, Float64Array, Float64Array, Float64Array, Float64Array, Float64Array];
  let segmentSamples = 1; // samples per segment, doubling as the capture grows
  // Sample index, samples analysed and Σ radius, in a typed array: the loop keeps closure numbers boxed and
  // allocated a heap number per sample.
  const totals = new Float64Array(3);

  function pushNoise(value: number): void {
    for (let level = 0; level < NOISE_LEVELS; level++) {
      if (hasPrevious[level]) {
        const d = value - previous[level]!;
        squares[level] += d * d;
        differences[level] += 1;
      }
      previous[level] = value;
      hasPrevious[level] = 1;
      if (!hasHalf[level]) {
        half[level] = value;
        hasHalf[level] = 1;
        return;
      }
      value = 0.5 * (half[level]! + value);
      hasHalf[level] = 0;
    }
  }

  /** The mean residual so far at a phase position (in bins, 0..bins), between the nearest filled bin centres. */
  function lockedAt(position: number): number {
    const below = Math.floor(position - 0.5);
    const low = (below + bins) % bins;
    const high = (below + 1) % bins;
    const lowCount = binCounts[low]!;
    const highCount = binCounts[high]!;
    if (lowCount === 0 || highCount === 0) return lowCount > 0 ? binSums[low]! / lowCount : highCount > 0 ? binSums[high]! / highCount : 0;
    const t = position - 0.5 - below;
    return (1 - t) * (binSums[low]! / lowCount) + t * (binSums[high]! / highCount);
  }

  function mergeSegments(): void {
    for (let k = 0; k < segments / 2; k++) {
      for (let j = 0; j < stride; j++) {
        segmentSums[k * stride + j] = segmentSums[2 * k * stride + j]! + segmentSums[(2 * k + 1) * stride + j]!;
      }
    }
    segmentSums.fill(0, (segments >> 1) * stride);
    segmentSamples *= 2;
  }

  function add(u: ArrayLike<number>, v: ArrayLike<number>, length: number, use?: ArrayLike<number>): void {
    const first = totals[0]!;
    let i = 0;
    while (i < length) {
      if (first + i >= segments * segmentSamples) {
        // Past the last segment: the segments merge when the next analysed sample comes, if one does.
        i = run(u, v, i, length, use, -1);
        while (i < length && first + i >= segments * segmentSamples) mergeSegments();
        continue;
      }
      const segment = Math.floor((first + i) / segmentSamples);
      const to = Math.min(length, (segment + 1) * segmentSamples - first);
      if (runKernel === undefined) i = run(u, v, i, to, use, segment * stride);
      else {
        runKernel(u, v, i, to, use, bins, binPerRad, state, kernelSums);
        // Added as run adds its own sums, in the same order.
        const base = segment * stride;
        for (let k = 0; k < stride; k++) segmentSums[base + k] += kernelSums[k]!;
        totals[1] += kernelSums[1]!;
        totals[2] += kernelSums[stride]!;
        i = to;
      }
    }
    totals[0] = first + length;
  }

  /**
   * Analyses samples from..to−1 of one segment (its sums at `base`), the segment's sums in locals and added once at
   * the end; with `base` −1 only finds the next analysed sample. Returns where it stopped.
   */
  function run(u: ArrayLike<number>, v: ArrayLike<number>, from: number, to: number, use: ArrayLike<number> | undefined, base: number): number {
    let analysed = 0, radiusSum = 0, sum = 0;
    let c1 = 0, s1 = 0, c2 = 0, s2 = 0, c3 = 0, s3 = 0, c4 = 0, s4 = 0, c5 = 0, s5 = 0, c6 = 0, s6 = 0, c7 = 0, s7 = 0, c8 = 0, s8 = 0;
    let i = from;
    for (; i < to; i++) {
      const ui = u[i]!;
      const vi = v[i]!;
      const r = Math.sqrt(ui * ui + vi * vi);
      if ((use !== undefined && !use[i]) || !(r > 0 && r < Infinity)) continue;
      if (base < 0) return i;
      const residual = r - 1;
      const c = ui / r;
      const s = vi / r;
      const position = (Math.atan2(s, c) + Math.PI) * binPerRad;
      const bin = Math.min(bins - 1, Math.floor(position));
      // The noise is what the phase does not explain: the part locked to the phase so far (binned means, linearly
      // interpolated between bin centres) comes off first, or a radius harmonic would read as red noise.
      pushNoise(residual - lockedAt(position));
      binSums[bin] += residual;
      binCounts[bin] += 1;
      sum += residual;
      // cos kφ, sin kφ for k = 1..RESIDUAL_ORDERS (8) by angle addition.
      let ck = c, sk = s, next = 0;
      c1 += ck; s1 += sk;
      next = ck * c - sk * s; sk = sk * c + ck * s; ck = next; c2 += ck; s2 += sk;
      next = ck * c - sk * s; sk = sk * c + ck * s; ck = next; c3 += ck; s3 += sk;
      next = ck * c - sk * s; sk = sk * c + ck * s; ck = next; c4 += ck; s4 += sk;
      next = ck * c - sk * s; sk = sk * c + ck * s; ck = next; c5 += ck; s5 += sk;
      next = ck * c - sk * s; sk = sk * c + ck * s; ck = next; c6 += ck; s6 += sk;
      next = ck * c - sk * s; sk = sk * c + ck * s; ck = next; c7 += ck; s7 += sk;
      next = ck * c - sk * s; sk = sk * c + ck * s; ck = next; c8 += ck; s8 += sk;
      analysed++;
      radiusSum += r;
    }
    if (base < 0) return i;
    segmentSums[base] += sum;
    segmentSums[base + 1] += analysed;
    segmentSums[base + 2] += c1;
    segmentSums[base + 3] += s1;
    segmentSums[base + 4] += c2;
    segmentSums[base + 5] += s2;
    segmentSums[base + 6] += c3;
    segmentSums[base + 7] += s3;
    segmentSums[base + 8] += c4;
    segmentSums[base + 9] += s4;
    segmentSums[base + 10] += c5;
    segmentSums[base + 11] += s5;
    segmentSums[base + 12] += c6;
    segmentSums[base + 13] += s6;
    segmentSums[base + 14] += c7;
    segmentSums[base + 15] += s7;
    segmentSums[base + 16] += c8;
    segmentSums[base + 17] += s8;
    totals[1] += analysed;
    totals[2] += radiusSum;
    return i;
  }

  /** Cosine and sine coefficients of r − 1 per order (index k), from the binned means; false when too few bins hold samples. */
  function harmonicCoefficients(a: Float64Array, b: Float64Array): number {
    let filled = 0;
    for (let bin = 0; bin < bins; bin++) if (binCounts[bin]! > 0) filled++;
    if (filled === 0) return 0;
    const halfWidth = Math.PI / bins;
    for (let k = 1; k <= RESIDUAL_ORDERS; k++) {
      let re = 0;
      let im = 0;
      for (let bin = 0; bin < bins; bin++) {
        if (binCounts[bin]! === 0) continue;
        const value = binSums[bin]! / binCounts[bin]!;
        const centre = ((bin + 0.5) / bins) * TWO_PI - Math.PI;
        re += value * Math.cos(k * centre);
        im += value * Math.sin(k * centre);
      }
      // Averaging over a bin of width w scales harmonic k by sinc(k·w/2); undo it.
      const gain = Math.sin(k * halfWidth) / (k * halfWidth);
      a[k] = (2 * re) / filled / gain;
      b[k] = (2 * im) / filled / gain;
    }
    return filled / bins;
  }

  function segmentMeans(out: Float64Array, a: Float64Array, b: Float64Array, removeLocked: boolean): void {
    for (let k = 0; k < segments; k++) {
      const base = k * stride;
      const count = segmentSums[base + 1]!;
      let sum = segmentSums[base]!;
      if (removeLocked) for (let order = 1; order <= RESIDUAL_ORDERS; order++) sum -= a[order]! * segmentSums[base + 2 * order]! + b[order]! * segmentSums[base + 2 * order + 1]!;
      out[k] = count > 0 ? 1 + sum / count : NaN;
    }
  }

  function summary(): ResidualSummary {
    const a = new Float64Array(RESIDUAL_ORDERS + 1);
    const b = new Float64Array(RESIDUAL_ORDERS + 1);
    const binCoverage = harmonicCoefficients(a, b);
    const stated = binCoverage >= MIN_BIN_COVERAGE;
    const radiusHarmonics: number[] = [];
    const radiusHarmonicPhasesRad: number[] = [];
    for (let k = 1; k <= RESIDUAL_ORDERS; k++) {
      radiusHarmonics.push(stated ? Math.hypot(a[k]!, b[k]!) : NaN);
      radiusHarmonicPhasesRad.push(stated ? Math.atan2(b[k]!, a[k]!) : NaN);
    }
    let radiusDriftRelative = NaN;
    if (stated) {
      const means = new Float64Array(segments);
      segmentMeans(means, a, b, true);
      let low = Infinity;
      let high = -Infinity;
      // A segment with under half the samples of the fullest (the last one, or one mostly masked) is too noisy to
      // compare; the fullest, not the segment's length, so that a run analysed block by block (skip) compares too.
      let fullest = 0;
      for (let k = 0; k < segments; k++) fullest = Math.max(fullest, segmentSums[k * stride + 1]!);
      for (let k = 0; k < segments; k++) {
        if (!(segmentSums[k * stride + 1]! >= fullest / 2)) continue;
        low = Math.min(low, means[k]!);
        high = Math.max(high, means[k]!);
      }
      if (high >= low) radiusDriftRelative = high - low;
    }
    // Allan variance per octave: σ²(τ) = ½⟨(ȳ_{k+1} − ȳ_k)²⟩; slope of log σ² against log τ by least squares.
    let levels = 0;
    let sx = 0, sy = 0, sxx = 0, sxy = 0;
    for (let level = 0; level < NOISE_LEVELS; level++) {
      if (differences[level]! < MIN_DIFFERENCES || !(squares[level]! > 0)) break;
      const y = Math.log2(squares[level]! / (2 * differences[level]!));
      sx += level;
      sy += y;
      sxx += level * level;
      sxy += level * y;
      levels++;
    }
    const slope = levels >= 3 ? (levels * sxy - sx * sy) / (levels * sxx - sx * sx) : NaN;
    return {
      samples: totals[1]!,
      binCoverage,
      meanRadius: totals[1]! > 0 ? totals[2]! / totals[1]! : NaN,
      radiusHarmonics,
      radiusHarmonicPhasesRad,
      radiusDriftRelative,
      radiusNoiseRms: differences[0]! > 0 ? Math.sqrt(squares[0]! / (2 * differences[0]!)) : NaN,
      noiseSpectralSlope: -slope - 1,
    };
  }

  function radiusOverTime(): RadiusOverTime {
    const a = new Float64Array(RESIDUAL_ORDERS + 1);
    const b = new Float64Array(RESIDUAL_ORDERS + 1);
    const stated = harmonicCoefficients(a, b) >= MIN_BIN_COVERAGE;
    const all = new Float64Array(segments);
    segmentMeans(all, a, b, stated);
    let used = 0;
    for (let k = 0; k < segments; k++) if (segmentSums[k * stride + 1]! > 0) used = k + 1;
    const sampleIndexOut = new Float64Array(used);
    const samples = new Float64Array(used);
    for (let k = 0; k < used; k++) {
      sampleIndexOut[k] = k * segmentSamples;
      samples[k] = segmentSums[k * stride + 1]!;
    }
    return { sampleIndex: sampleIndexOut, samples, meanRadius: all.slice(0, used) };
  }

  function reset(): void {
    binSums.fill(0);
    binCounts.fill(0);
    segmentSums.fill(0);
    previous.fill(0);
    hasPrevious.fill(0);
    half.fill(0);
    hasHalf.fill(0);
    squares.fill(0);
    differences.fill(0);
    segmentSamples = 1;
    totals.fill(0);
  }

  reset();
  return {
    add,
    skip(length) {
      if (length > 0) totals[0] += length;
    },
    summary,
    radiusByPhase() {
      return binSums.map((sum, bin) => (binCounts[bin]! > 0 ? sum / binCounts[bin]! : NaN));
    },
    radiusOverTime,
    reset,
  };
}

/** What a residual analysis could mean for position, as bounds under the ghost-beam model (see the file's head). */
export interface ResidualMeaning {
  /** The largest radius harmonic: its order (1..8) and amplitude relative to the radius (NaN when not stated). */
  readonly largestOrder: number;
  readonly largestRelative: number;
  /** Periodic error of position it could mean, amplitude in metres: a·metresPerRad (a radius term a ↔ a phase term a rad). */
  readonly harmonicPositionM: number;
  /** Position error the radius drift could mean if the centre moved with it, metres: drift·metresPerRad. */
  readonly driftPositionM: number;
  /** 'white' (|β| ≤ 0.5), 'red' (β < −0.5: correlated, averages down slower than 1/√n) or 'blue' (β > 0.5); '' when unknown. */
  readonly noiseColour: 'white' | 'red' | 'blue' | '';
}

export function residualMeaning(summary: ResidualSummary, metresPerRad: number): ResidualMeaning {
  let largestOrder = 0;
  let largestRelative = NaN;
  summary.radiusHarmonics.forEach((amplitude, index) => {
    if (!(amplitude <= largestRelative)) {
      largestRelative = amplitude;
      largestOrder = index + 1;
    }
  });
  const beta = summary.noiseSpectralSlope;
  return {
    largestOrder: Number.isFinite(largestRelative) ? largestOrder : 0,
    largestRelative,
    harmonicPositionM: largestRelative * metresPerRad,
    driftPositionM: summary.radiusDriftRelative * metresPerRad,
    noiseColour: !Number.isFinite(beta) ? '' : beta < -0.5 ? 'red' : beta > 0.5 ? 'blue' : 'white',
  };
}
