// Spectral density of a sampled signal by Welch's method of averaged, windowed, overlapped periodograms
// (P. D. Welch, IEEE Trans. Audio Electroacoust. AU-15(2), 70–73, 1967), scaled as in G. Heinzel, A. Rüdiger and
// R. Schilling, "Spectrum and spectral density estimation by the Discrete Fourier transform (DFT), including a
// comprehensive list of window functions and some new flat-top windows" (Max-Planck-Institut für
// Gravitationsphysik, 2002), sections 9–10: PSD = 2|X_k|² / (f_s S₂), S₁ = Σw, S₂ = Σw², ENBW = f_s S₂ / S₁².

import { finiteNumber, integerInRange, numberInRange, oneOf, OptionError, positiveFinite } from './options.js';
import { TWO_PI } from './phase.js';

/** An in-place complex FFT of one power-of-two size (iterative radix-2, decimation in time). */
export interface Fft {
  readonly size: number;
  /** Replaces (re, im), each at least `size` long, with their forward DFT X_k = Σ x_j e^{−2πi jk/N}. */
  transform(re: Float64Array, im: Float64Array): void;
}

/** Builds the twiddle and bit-reversal tables once for `size` (a power of two, 2..2^24). */
export function createFft(size: number): Fft {
  integerInRange('size', size, 2, 2 ** 24);
  if ((size & (size - 1)) !== 0) throw new OptionError('size', 'a power of two', size);
  const half = size >> 1;
  const cos = new Float64Array(half);
  const sin = new Float64Array(half);
  for (let k = 0; k < half; k++) {
    cos[k] = Math.cos((TWO_PI * k) / size);
    sin[k] = -Math.sin((TWO_PI * k) / size);
  }
  const reversed = new Uint32Array(size);
  const bits = Math.round(Math.log2(size));
  for (let i = 0; i < size; i++) {
    let r = 0;
    for (let b = 0; b < bits; b++) r |= ((i >> b) & 1) << (bits - 1 - b);
    reversed[i] = r;
  }
  return {
    size,
    transform(re, im) {
      for (let i = 0; i < size; i++) {
        const j = reversed[i]!;
        if (j > i) {
          const tr = re[i]!;
          re[i] = re[j]!;
          re[j] = tr;
          const ti = im[i]!;
          im[i] = im[j]!;
          im[j] = ti;
        }
      }
      for (let length = 2; length <= size; length <<= 1) {
        const span = length >> 1;
        const step = size / length;
        for (let start = 0; start < size; start += length) {
          for (let k = 0; k < span; k++) {
            const wr = cos[k * step]!;
            const wi = sin[k * step]!;
            const a = start + k;
            const b = a + span;
            const br = re[b]! * wr - im[b]! * wi;
            const bi = re[b]! * wi + im[b]! * wr;
            re[b] = re[a]! - br;
            im[b] = im[a]! - bi;
            re[a] = re[a]! + br;
            im[a] = im[a]! + bi;
          }
        }
      }
    },
  };
}

export type SpectralWindow = 'hann' | 'rectangular';
export type Detrend = 'none' | 'mean' | 'linear';

export interface WelchOptions {
  /** Sample rate, Hz; positive finite. */
  readonly rateHz: number;
  /** Samples per segment: a power of two in 16..2^22; default 4096. The bin width is rateHz / segmentSamples. */
  readonly segmentSamples?: number;
  /** Share of a segment that overlaps the next, in [0, 0.95]; default 0.5 (Welch 1967 recommends half overlap for the Hann window). */
  readonly overlap?: number;
  /** `hann` (the DFT-even Hann window, Heinzel et al. 2002 §C.4; default) or `rectangular`. */
  readonly window?: SpectralWindow;
  /**
   * What each segment loses before its window: `linear` (least-squares line, default: a stage moving at constant
   * velocity would otherwise leak its ramp over the whole spectrum), `mean`, or `none` (keeps Parseval exact).
   */
  readonly detrend?: Detrend;
}

export interface SpectralDensity {
  /** Frequencies of the bins, Hz: k · rateHz / segmentSamples for k = 0..segmentSamples/2. */
  readonly frequencyHz: Float64Array;
  /** One-sided power spectral density, unit²/Hz (unit of the input values). */
  readonly psd: Float64Array;
  /** Amplitude spectral density √psd, unit/√Hz. */
  readonly asd: Float64Array;
  /** Bin spacing, Hz. */
  readonly binWidthHz: number;
  /**
   * Equivalent noise bandwidth of the window, Hz: the RMS amplitude of a sinusoid centred on a bin is √(psd·enbwHz)
   * there (Heinzel et al. 2002, eq. 23–24).
   */
  readonly enbwHz: number;
  /** Segments averaged. */
  readonly segments: number;
}

export interface WelchEstimator {
  readonly options: Readonly<Required<WelchOptions>>;
  /**
   * Adds consecutive samples. A segment that holds a non-finite value is left out (counted in `skippedSegments`);
   * allocates nothing.
   */
  add(values: ArrayLike<number>, length: number): void;
  /** Segments averaged so far and segments left out for non-finite values. */
  readonly segments: number;
  readonly skippedSegments: number;
  /** The average of the segments so far (allocates its arrays); psd is all NaN before the first segment. */
  result(): SpectralDensity;
  reset(): void;
}

/** The estimator's defaults, stated once (the spectrum tool's options default to them too, but for its longer segment). */
export const WELCH_DEFAULTS = Object.freeze({ segmentSamples: 4096, overlap: 0.5, window: 'hann' as SpectralWindow, detrend: 'linear' as Detrend });

export function createWelchEstimator(options: WelchOptions): WelchEstimator {
  const rateHz = positiveFinite('rateHz', options.rateHz);
  const size = integerInRange('segmentSamples', options.segmentSamples ?? WELCH_DEFAULTS.segmentSamples, 16, 2 ** 22);
  if ((size & (size - 1)) !== 0) throw new OptionError('segmentSamples', 'a power of two', size);
  const overlap = numberInRange('overlap', options.overlap ?? WELCH_DEFAULTS.overlap, 0, 0.95);
  const window = oneOf('window', options.window ?? WELCH_DEFAULTS.window, ['hann', 'rectangular'] as const);
  const detrend = oneOf('detrend', options.detrend ?? WELCH_DEFAULTS.detrend, ['none', 'mean', 'linear'] as const);
  const resolved = Object.freeze({ rateHz, segmentSamples: size, overlap, window, detrend });
  const hop = Math.max(1, Math.round(size * (1 - overlap)));
  const bins = (size >> 1) + 1;

  const weights = new Float64Array(size);
  let s1 = 0;
  let s2 = 0;
  for (let j = 0; j < size; j++) {
    const w = window === 'hann' ? 0.5 - 0.5 * Math.cos((TWO_PI * j) / size) : 1;
    weights[j] = w;
    s1 += w;
    s2 += w * w;
  }
  // Σ t² over t = j − (N − 1)/2, for the slope of the least-squares line.
  const centre = (size - 1) / 2;
  const sumT2 = (size * (size * size - 1)) / 12;
  const fft = createFft(size);
  const buffer = new Float64Array(size);
  const re = new Float64Array(size);
  const im = new Float64Array(size);
  const power = new Float64Array(bins);
  let filled = 0;
  let segments = 0;
  let skipped = 0;

  function processSegment(): void {
    let sum = 0;
    let sumTx = 0;
    for (let j = 0; j < size; j++) {
      const value = buffer[j]!;
      sum += value;
      sumTx += (j - centre) * value;
    }
    if (!Number.isFinite(sum) || !Number.isFinite(sumTx)) {
      skipped++;
      return;
    }
    const mean = detrend === 'none' ? 0 : sum / size;
    const slope = detrend === 'linear' ? sumTx / sumT2 : 0;
    for (let j = 0; j < size; j++) {
      re[j] = (buffer[j]! - mean - slope * (j - centre)) * weights[j]!;
      im[j] = 0;
    }
    fft.transform(re, im);
    for (let k = 0; k < bins; k++) power[k] += re[k]! * re[k]! + im[k]! * im[k]!;
    segments++;
  }

  const estimator: WelchEstimator = {
    options: resolved,
    add(values, length) {
      let i = 0;
      while (i < length) {
        const take = Math.min(size - filled, length - i);
        for (let j = 0; j < take; j++) buffer[filled + j] = values[i + j]!;
        filled += take;
        i += take;
        if (filled === size) {
          processSegment();
          // The next segment starts `hop` samples later: keep the overlapping tail.
          buffer.copyWithin(0, hop);
          filled = size - Math.min(hop, size);
        }
      }
    },
    get segments() {
      return segments;
    },
    get skippedSegments() {
      return skipped;
    },
    result() {
      const frequencyHz = new Float64Array(bins);
      const psd = new Float64Array(bins);
      const asd = new Float64Array(bins);
      for (let k = 0; k < bins; k++) {
        frequencyHz[k] = (k * rateHz) / size;
        // One-sided: every bin but DC and Nyquist also carries its negative-frequency twin.
        const scale = (k === 0 || k === bins - 1 ? 1 : 2) / (rateHz * s2 * segments);
        psd[k] = segments === 0 ? Number.NaN : power[k]! * scale;
        asd[k] = Math.sqrt(psd[k]!);
      }
      return { frequencyHz, psd, asd, binWidthHz: rateHz / size, enbwHz: (rateHz * s2) / (s1 * s1), segments };
    },
    reset() {
      filled = 0;
      segments = 0;
      skipped = 0;
      power.fill(0);
    },
  };
  return estimator;
}

/**
 * Cumulative RMS from the lowest frequency up: out[k] = √(Σ_{j ≤ k} psd[j] · binWidthHz), in the unit of the
 * signal. Its last value is the RMS of the (detrended, windowed) signal, by Parseval's theorem.
 */
export function cumulativeRms(psd: ArrayLike<number>, binWidthHz: number, out: Float64Array = new Float64Array(psd.length)): Float64Array {
  positiveFinite('binWidthHz', binWidthHz);
  let sum = 0;
  for (let k = 0; k < psd.length; k++) {
    sum += psd[k]! * binWidthHz;
    out[k] = Math.sqrt(sum);
  }
  return out;
}

/**
 * Frequencies, Hz, of the periodic (nonlinearity) error at a steady speed: the fringe frequency f₁ = |v| / (metres
 * per fringe) and its multiples k·f₁ up to `maxHz` (at most `maxCount` of them). A once-per-fringe error sits at
 * f₁, a twice-per-fringe error at 2f₁ (common practice: the error is periodic in the fringe phase).
 */
export function periodicErrorLinesHz(speedMS: number, metresPerFringe: number, maxHz: number, maxCount = 8): Float64Array {
  const fringeHz = Math.abs(finiteNumber('speedMS', speedMS)) / positiveFinite('metresPerFringe', metresPerFringe);
  positiveFinite('maxHz', maxHz);
  integerInRange('maxCount', maxCount, 1, 1000);
  if (fringeHz === 0) return new Float64Array(0);
  const count = Math.min(maxCount, Math.floor(maxHz / fringeHz));
  const lines = new Float64Array(count);
  for (let k = 0; k < count; k++) lines[k] = (k + 1) * fringeHz;
  return lines;
}

/**
 * RMS amplitude of a spectral line near `frequencyHz`: √(Σ psd·Δf) over the bins within `halfWidthBins` of the
 * largest bin near it. By Parseval's theorem this holds the line's whole power A²/2 whatever its place between
 * bins, as long as the window's leakage stays within the span (±3 bins hold nearly all of a Hann line).
 */
export function lineRms(spectrum: SpectralDensity, frequencyHz: number, halfWidthBins = 3): number {
  finiteNumber('frequencyHz', frequencyHz);
  integerInRange('halfWidthBins', halfWidthBins, 0, 1000);
  const last = spectrum.psd.length - 1;
  const nearest = Math.round(frequencyHz / spectrum.binWidthHz);
  if (nearest < 0 || nearest > last) return Number.NaN;
  let peak = nearest;
  for (let k = Math.max(0, nearest - 1); k <= Math.min(last, nearest + 1); k++) if (spectrum.psd[k]! > spectrum.psd[peak]!) peak = k;
  let sum = 0;
  for (let k = Math.max(0, peak - halfWidthBins); k <= Math.min(last, peak + halfWidthBins); k++) sum += spectrum.psd[k]!;
  return Math.sqrt(sum * spectrum.binWidthHz);
}
