// Vibration and stability of a position record: its amplitude spectral density (Welch), cumulative RMS, overlapping
// Allan deviation and the frequencies where the periodic error of the fringe interpolation shows at a steady speed.
// One pass over the samples in constant memory; the published methods are cited in spectrum.ts and allan.ts.

import { allanAveragingFactors, createAveragingDecimator, overlappingAllanDeviation, type AllanDeviation } from './allan.js';
import { integerInRange, numberInRange, positiveFinite } from './options.js';
import { createWelchEstimator, cumulativeRms, periodicErrorLinesHz, type SpectralDensity, type WelchOptions } from './spectrum.js';

export interface StabilityAnalyzerOptions extends WelchOptions {
  /** Length per fringe of the phase, m (λ_vac / (fold · n)); when given, the periodic-error lines are located. */
  readonly metresPerFringe?: number;
  /** Largest count of values kept for the Allan deviation (older ones are averaged pairwise); even, 16..2^26, default 2^20. */
  readonly maxAllanValues?: number;
  /** Averaging times per decade of the Allan deviation; integer 1..100, default 10. */
  readonly allanPerDecade?: number;
  /**
   * The speed counts as steady when the segment speeds spread by at most this share of their mean (standard
   * deviation over mean); only then are periodic-error lines located. In (0, 1], default 0.05.
   */
  readonly steadySpread?: number;
}

export interface SteadySpeed {
  /** Mean of the segment speeds |slope of a least-squares line|, m/s. */
  readonly meanMS: number;
  /** Standard deviation of the segment speeds over their mean (NaN when fewer than two segments or at rest). */
  readonly spread: number;
  readonly steady: boolean;
}

export interface StabilityResult {
  readonly spectrum: SpectralDensity;
  /** Cumulative RMS from the lowest frequency up, m (see cumulativeRms). */
  readonly cumulativeRmsM: Float64Array;
  readonly allan: AllanDeviation;
  readonly speed: SteadySpeed;
  /** Periodic-error lines k·f₁, Hz, below the Nyquist frequency; empty when the speed is not steady or metresPerFringe is not given. */
  readonly linesHz: Float64Array;
  readonly samples: number;
}

export interface StabilityAnalyzer {
  /** Adds consecutive positions, m. Allocates nothing. */
  add(positionM: ArrayLike<number>, length: number): void;
  /** Computes the results so far (allocates). */
  result(): StabilityResult;
  reset(): void;
}

export function createStabilityAnalyzer(options: StabilityAnalyzerOptions): StabilityAnalyzer {
  const welch = createWelchEstimator(options);
  const { rateHz, segmentSamples } = welch.options;
  const metresPerFringe = options.metresPerFringe === undefined ? null : positiveFinite('metresPerFringe', options.metresPerFringe);
  const perDecade = integerInRange('allanPerDecade', options.allanPerDecade ?? 10, 1, 100);
  const steadySpread = numberInRange('steadySpread', options.steadySpread ?? 0.05, 0, 1, true);
  const decimator = createAveragingDecimator({ maxValues: options.maxAllanValues ?? 2 ** 20 });
  // Speed per non-overlapping segment from a least-squares line: Σ(t − t̄)x / Σ(t − t̄)², t in samples.
  const centre = (segmentSamples - 1) / 2;
  const sumT2 = (segmentSamples * (segmentSamples * segmentSamples - 1)) / 12;
  let inSegment = 0;
  let sumTx = 0;
  let speedCount = 0;
  let speedSum = 0;
  let speedSquares = 0;
  let samples = 0;

  return {
    add(positionM, length) {
      welch.add(positionM, length);
      decimator.add(positionM, length);
      let filled = inSegment;
      let tx = sumTx;
      for (let i = 0; i < length; i++) {
        tx += (filled - centre) * positionM[i]!;
        if (++filled === segmentSamples) {
          if (Number.isFinite(tx)) {
            const speed = Math.abs((tx / sumT2) * rateHz);
            speedCount++;
            speedSum += speed;
            speedSquares += speed * speed;
          }
          filled = 0;
          tx = 0;
        }
      }
      inSegment = filled;
      sumTx = tx;
      samples += length;
    },
    result() {
      const spectrum = welch.result();
      const values = decimator.values();
      const tau0S = decimator.stride / rateHz;
      const allan = overlappingAllanDeviation(values, values.length, tau0S, allanAveragingFactors(values.length, perDecade));
      const meanMS = speedCount > 0 ? speedSum / speedCount : Number.NaN;
      const variance = speedCount > 1 ? Math.max(0, (speedSquares - speedCount * meanMS * meanMS) / (speedCount - 1)) : Number.NaN;
      const spread = meanMS > 0 ? Math.sqrt(variance) / meanMS : Number.NaN;
      const steady = spread <= steadySpread;
      const linesHz = steady && metresPerFringe !== null ? periodicErrorLinesHz(meanMS, metresPerFringe, rateHz / 2) : new Float64Array(0);
      return {
        spectrum,
        cumulativeRmsM: spectrum.segments > 0 ? cumulativeRms(spectrum.psd, spectrum.binWidthHz) : new Float64Array(spectrum.psd.length).fill(Number.NaN),
        allan,
        speed: { meanMS, spread, steady },
        linesHz,
        samples,
      };
    },
    reset() {
      welch.reset();
      decimator.reset();
      inSegment = 0;
      sumTx = 0;
      speedCount = 0;
      speedSum = 0;
      speedSquares = 0;
      samples = 0;
    },
  };
}
