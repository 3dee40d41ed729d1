// Periodic (nonlinearity) error of the phase: binned against the fringe phase, with its first and second
// harmonics, peak-to-peak and RMS. Also a trend remover that separates the periodic error from smooth motion
// (constant-velocity assumption: a low-bandwidth tracking loop follows the motion, not the fringe-rate error).

import { integerInRange, numberInRange, OptionError, positiveFinite } from './options.js';
import { TWO_PI } from './phase.js';
import { choleskyInPlace } from './fit/numerics.js';

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

/** Phase bins per fringe of the binned error, when none is given. */
const DEFAULT_BINS = 64;
/**
 * Largest RMS residual, rad, a smooth-motion model may leave in a window (or a whole move) that is used: 0.05, about
 * 2.5 nm at 633 nm, fold 2. The default of the window detrender and of the harmonic fit (fit/harmonics.ts).
 */
export const DEFAULT_MAX_MOTION_RESIDUAL_RAD = 0.05;

/**
 * Adds samples to the bins as PeriodicErrorAnalyzer.add does, in order: each sample with a non-zero `use[i]` (when
 * given) and finite phase and error adds its error to its bin's sum in `sums` and 1 to its count in `counts`, its bin
 * min(bins − 1, ⌊(φ mod 2π)·binPerRad⌋) with φ mod 2π = φ − 2π·⌊φ/2π⌋ (a bin below 0, from rounding, takes nothing).
 */
export type PeriodicErrorBinning = (
  phaseRad: ArrayLike<number>,
  errorRad: ArrayLike<number>,
  length: number,
  use: ArrayLike<number> | undefined,
  binPerRad: number,
  sums: Float64Array,
  counts: Float64Array,
) => void;

export interface PeriodicErrorAnalyzerOptions {
  /** Phase bins per fringe. Default 64; integer 8..4096. */
  readonly bins?: number;
  /** The binning of `add` (see PeriodicErrorBinning). Default: this module's loop; src/accel's createPeriodicErrorBinning gives the same doubles faster. */
  readonly binning?: PeriodicErrorBinning;
}

export function createPeriodicErrorAnalyzer(options: PeriodicErrorAnalyzerOptions = {}): PeriodicErrorAnalyzer {
  const bins = integerInRange('bins', options.bins ?? DEFAULT_BINS, 8, 4096);
  const binning = options.binning;
  if (binning !== undefined && typeof binning !== 'function') throw new OptionError('binning', 'a function', binning);
  const sums = new Float64Array(bins);
  const counts = new Float64Array(bins);
  const binPerRad = bins / TWO_PI;

  function add(phaseRad: ArrayLike<number>, errorRad: ArrayLike<number>, length: number, use?: ArrayLike<number>): void {
    if (binning !== undefined) {
      binning(phaseRad, errorRad, length, use, binPerRad, sums, counts);
      return;
    }
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
  const maxResidualRad = positiveFinite('maxResidualRad', options.maxResidualRad ?? DEFAULT_MAX_MOTION_RESIDUAL_RAD);
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

export interface PhaseDomainOptions {
  /** Harmonic orders estimated, 1..N. Default 4; integer 1..8. */
  readonly orders?: number;
  /**
   * A window ends once the phase in it spans this range (highest − lowest), rad: each window then holds the same
   * share of the fringe whatever the speed, so fast motion gets short windows (a cubic follows it) and slow motion
   * long ones (the harmonics stay apart from the cubic). Default 4π (two fringes).
   */
  readonly windowSpanRad?: number;
  /** ...or once it holds this many samples. Default 4096; integer 32..65536. */
  readonly maxWindowSamples?: number;
  /** Phase bins of the result. Default 64; integer 8..4096. */
  readonly bins?: number;
  /**
   * A window is used only if the motion in it departs from a cubic in time by at most this RMS beyond the noise, rad
   * (what the window's own cubic and harmonics leave, less the noise that second differences show): motion the cubic
   * cannot follow would leak into the shared harmonics. Default 0.003 (0.15 nm at 633 nm, fold 2). In a window that
   * spans `windowSpanRad` the periodic error itself does not count against it, so any size of it is measured; a
   * window cut by its length counts what the cubic alone leaves.
   */
  readonly maxMisfitRad?: number;
  /**
   * The windows' per-sample sums (see PhaseDomainSums). Default: this module's loops; src/accel's
   * createPhaseDomainSums gives the same doubles faster.
   */
  readonly sums?: PhaseDomainSums;
}

/**
 * The per-sample sums of a window of `size` phases (rad) for `orders` harmonic orders, written into `out`: p0-p3 (the
 * offsets d = φ − φ₀ on the basis), Σd², the Σ of squared second differences of φ, then per order k = 1..orders
 * Σcos kφ, Σsin kφ and the dot products of cos kφ, sin kφ with the basis (w0, q1, q2, q3) and with d, as pairs
 * [cos, sin], then per order k = orders+1..2·orders Σcos kφ, Σsin kφ; 6 + 12·orders + 4·orders doubles. `basis` holds
 * centre, a2, a3, w0, w1, w2, w3 (see fitWindow). Each sum runs over the samples in order.
 */
export type PhaseDomainSums = (phase: Float64Array, size: number, orders: number, basis: Float64Array, out: Float64Array) => void;

export interface PhaseDomainEstimator {
  /** Unwrapped corrected phase (rad) and a 0/1 mask of trustworthy samples; a masked sample ends its window unused. */
  process(unwrappedPhaseRad: ArrayLike<number>, valid: ArrayLike<number>, length: number): void;
  /**
   * Lets `length` samples pass unanalysed, exactly as `process` with all of them masked (the window they touch is
   * left out), at no per-sample cost: for an analysis of every n-th block of a long run.
   */
  skip(length: number): void;
  /** The periodic error e(φ) = Σ a_k cos kφ + b_k sin kφ found, summarised as the binned analyzer does. */
  summary(): PeriodicErrorSummary;
  /** e(φ) at the bin centres, rad (NaN before any window was used). */
  binnedMeanRad(): Float64Array;
  /**
   * Clean windows fitted, windows used, and the smallest misfit (see `maxMisfitRad`) of any clean window, rad (NaN
   * before one): when no window is used, how far the motion was from what the method needs.
   */
  readonly windows: { readonly fitted: number; readonly used: number; readonly smallestMisfitRad: number };
  readonly options: { readonly orders: number; readonly windowSpanRad: number; readonly maxWindowSamples: number; readonly bins: number; readonly maxMisfitRad: number };
  reset(): void;
}

/** Fewest samples in a window: the cubic and the harmonics need more points than coefficients. */
const MIN_WINDOW_SAMPLES = 32;

/**
 * The residual periodic error in the phase domain, for any motion that a cubic in time follows over a short window,
 * however slow or irregular (reversals, stops), not only steady stretches of several fringes: in each window the
 * measured phase is φ_m = cubic(t) + Σ a_k cos kφ_m + b_k sin kφ_m + noise with the cubic its own and the harmonics
 * shared by all windows. Projecting the cubic out window by window (Frisch–Waugh–Lovell: the shared coefficients of a
 * least-squares fit with per-window nuisance terms are the fit of the projected data) leaves normal equations of
 * constant size. Windows are cut by the phase range they span, not time (a fixed length in samples, made short, takes slow motion's
 * first harmonic for part of the cubic), and a window is used only where the cubic follows the motion to within the
 * noise: on a smooth wander of 25 fringes in 12 000 samples without any periodic error, fixed 512-sample windows with
 * a 0.05 rad bound on what the cubic leaves read 0.72 nm p-p, these windows 0.03 nm. A window at rest never travels
 * far, ends at its length limit, projects to nothing and adds nothing.
 */
export function createPhaseDomainEstimator(options: PhaseDomainOptions = {}): PhaseDomainEstimator {
  const orders = integerInRange('orders', options.orders ?? 4, 1, 8);
  const windowSpanRad = positiveFinite('windowSpanRad', options.windowSpanRad ?? 2 * TWO_PI);
  const capacity = integerInRange('maxWindowSamples', options.maxWindowSamples ?? 4096, MIN_WINDOW_SAMPLES, 65536);
  const bins = integerInRange('bins', options.bins ?? DEFAULT_BINS, 8, 4096);
  const maxMisfitRad = positiveFinite('maxMisfitRad', options.maxMisfitRad ?? 0.003);
  if (options.sums !== undefined && typeof options.sums !== 'function') throw new OptionError('sums', 'a function', options.sums);
  const windowSums = options.sums ?? plainSums;
  const m = 2 * orders;
  // A window's basis constants and per-sample sums (PhaseDomainSums).
  const basis = new Float64Array(7);
  const sums = new Float64Array(6 + 16 * orders);
  const phase = new Float64Array(capacity);
  // Per window: Σ cos jφ and Σ sin jφ, j = 0..2·orders.
  const cosSums = new Float64Array(2 * orders + 1);
  const sinSums = new Float64Array(2 * orders + 1);
  // Per window: the harmonics' coefficients on the basis (4 × m), their projected normal equations, and what is
  // left of them.
  const onBasis = new Float64Array(4 * m);
  const normal = new Float64Array(m * m);
  const rhs = new Float64Array(m);
  const localNormal = new Float64Array(m * m);
  const localRhs = new Float64Array(m);
  const solved = new Float64Array(m);
  const work = new Float64Array(m * m);
  const reached = new Uint8Array(bins);
  let reachedBins = 0;
  // Per sample of a window: cos φ, sin φ, cos kφ and sin kφ of the order at hand, the basis polynomials 1-3 and the
  // phase less the window's first.
  const cosOne = new Float64Array(capacity);
  const sinOne = new Float64Array(capacity);
  const cosK = new Float64Array(capacity);
  const sinK = new Float64Array(capacity);
  const basis1 = new Float64Array(capacity);
  const basis2 = new Float64Array(capacity);
  const basis3 = new Float64Array(capacity);
  const offsets = new Float64Array(capacity);
  let filled = 0;
  // The phase range of the window so far: lowest, highest.
  const range = new Float64Array(2);
  let fitted = 0;
  let used = 0;
  let samples = 0;
  let smallestMisfitRad = NaN;

  /** Σ cos nφ and Σ sin nφ of the window for any n in −2·orders..2·orders. */
  const cosOf = (n: number): number => cosSums[n < 0 ? -n : n]!;
  const sinOf = (n: number): number => (n < 0 ? -sinSums[-n]! : sinSums[n]!);

  /** The plain PhaseDomainSums, over this estimator's scratch arrays (windows up to its capacity). */
  function plainSums(values: Float64Array, size: number, orders: number, constants: Float64Array, out: Float64Array): void {
    const origin = values[0]!;
    const centre = constants[0]!, a2 = constants[1]!, a3 = constants[2]!, w0 = constants[3]!, w1 = constants[4]!, w2 = constants[5]!, w3 = constants[6]!;
    // A pass for cos φ, sin φ and the basis, then one pass per order with its sums in locals (each sum still runs
    // over the samples in order): sums kept in arrays cost a load and a store per term and sample.
    let p0 = 0, p1 = 0, p2 = 0, p3 = 0, phaseSquares = 0, curvature = 0;
    let before = origin, beforeThat = origin;
    // cos kφ, sin kφ by angle addition: cos φ, sin φ from the window's first phase and the offset d from it, then
    // the higher orders from cos φ, sin φ; within a few units in the last place of Math.cos(kφ) (orders ≤ 8;
    // tests/core/phase-domain.test.ts holds the estimate to them). Math.cos of a long run's unwrapped phase (beyond
    // about 10^6 rad) takes the slow exact argument reduction; of d it never does.
    const cosOrigin = Math.cos(origin), sinOrigin = Math.sin(origin);
    for (let j = 0; j < size; j++) {
      const p = values[j]!;
      const d = p - origin;
      const cosD = Math.cos(d), sinD = Math.sin(d);
      const c1 = cosOrigin * cosD - sinOrigin * sinD;
      const s1 = sinOrigin * cosD + cosOrigin * sinD;
      cosOne[j] = cosK[j] = c1;
      sinOne[j] = sinK[j] = s1;
      const x = j - centre, x2 = x * x;
      const q1 = x * w1, q2 = (x2 - a2) * w2, q3 = (x2 - a3) * x * w3;
      basis1[j] = q1;
      basis2[j] = q2;
      basis3[j] = q3;
      offsets[j] = d;
      p0 += w0 * d;
      p1 += q1 * d;
      p2 += q2 * d;
      p3 += q3 * d;
      phaseSquares += d * d;
      // The noise, from second differences (6σ² for white noise; smooth motion adds next to nothing sample to sample).
      if (j >= 2) curvature += (p - 2 * before + beforeThat) ** 2;
      beforeThat = before;
      before = p;
    }
    out[0] = p0;
    out[1] = p1;
    out[2] = p2;
    out[3] = p3;
    out[4] = phaseSquares;
    out[5] = curvature;
    for (let order = 1; order <= orders; order++) {
      let cs = 0, ss = 0, c0 = 0, s0 = 0, c1 = 0, s1 = 0, c2 = 0, s2 = 0, c3 = 0, s3 = 0, cd = 0, sd = 0;
      for (let j = 0; j < size; j++) {
        let ck = cosK[j]!, sk = sinK[j]!;
        if (order > 1) {
          const co = cosOne[j]!, so = sinOne[j]!;
          const next = ck * co - sk * so;
          sk = sk * co + ck * so;
          ck = next;
          cosK[j] = ck;
          sinK[j] = sk;
        }
        const q1 = basis1[j]!, q2 = basis2[j]!, q3 = basis3[j]!, d = offsets[j]!;
        cs += ck;
        ss += sk;
        c0 += w0 * ck;
        s0 += w0 * sk;
        c1 += q1 * ck;
        s1 += q1 * sk;
        c2 += q2 * ck;
        s2 += q2 * sk;
        c3 += q3 * ck;
        s3 += q3 * sk;
        cd += ck * d;
        sd += sk * d;
      }
      const at = 12 * order - 6;
      out[at] = cs;
      out[at + 1] = ss;
      out[at + 2] = c0;
      out[at + 3] = s0;
      out[at + 4] = c1;
      out[at + 5] = s1;
      out[at + 6] = c2;
      out[at + 7] = s2;
      out[at + 8] = c3;
      out[at + 9] = s3;
      out[at + 10] = cd;
      out[at + 11] = sd;
    }
    for (let order = orders + 1; order <= 2 * orders; order++) {
      let cs = 0, ss = 0;
      for (let j = 0; j < size; j++) {
        const ck = cosK[j]!, sk = sinK[j]!, co = cosOne[j]!, so = sinOne[j]!;
        const next = ck * co - sk * so;
        const nextSine = sk * co + ck * so;
        cosK[j] = next;
        sinK[j] = nextSine;
        cs += next;
        ss += nextSine;
      }
      const at = 6 + 12 * orders + 2 * (order - orders - 1);
      out[at] = cs;
      out[at + 1] = ss;
    }
  }

  function fitWindow(size: number, spanned: boolean): void {
    fitted++;
    // The cubic's orthonormal basis over the window: the discrete orthogonal (Gram) polynomials of degree 0-3 in
    // x = j − (size − 1)/2, each scaled by 1/‖P_r‖ (Abramowitz & Stegun 22.17; their sums of squares are
    // N, N(N²−1)/12, N(N²−1)(N²−4)/180, N(N²−1)(N²−4)(N²−9)/2800). With it the least squares on the cubic are
    // plain dot products, here taken with the harmonics' in one pass.
    const n2 = size * size;
    const a2 = (n2 - 1) / 12;
    basis[0] = (size - 1) / 2;
    basis[1] = a2;
    basis[2] = (3 * n2 - 7) / 20;
    basis[3] = 1 / Math.sqrt(size);
    basis[4] = 1 / Math.sqrt(size * a2);
    basis[5] = 1 / Math.sqrt((size * (n2 - 1) * (n2 - 4)) / 180);
    basis[6] = 1 / Math.sqrt((size * (n2 - 1) * (n2 - 4) * (n2 - 9)) / 2800);
    // The phase's and the harmonics' dot products with the basis and with the phase, and Σ cos jφ, Σ sin jφ for j up
    // to 2·orders, from which the harmonics' products follow (cos a·cos b = ½[cos(a−b) + cos(a+b)] and so on). The
    // projected products follow from these (Frisch–Waugh–Lovell with an orthonormal Q: ĥ_rᵀĥ_c = h_rᵀh_c −
    // (Qᵀh_r)·(Qᵀh_c), ĥᵀφ̂ = hᵀφ − (Qᵀh)·(Qᵀφ), φ̂ᵀφ̂ = φᵀφ − |Qᵀφ|²): nothing is projected sample by sample.
    windowSums(phase, size, orders, basis, sums);
    const p0 = sums[0]!, p1 = sums[1]!, p2 = sums[2]!, p3 = sums[3]!, phaseSquares = sums[4]!, curvature = sums[5]!;
    for (let order = 1; order <= orders; order++) {
      const at = 12 * order - 6, k = 2 * order - 2;
      cosSums[order] = sums[at]!;
      sinSums[order] = sums[at + 1]!;
      onBasis[k] = sums[at + 2]!;
      onBasis[k + 1] = sums[at + 3]!;
      onBasis[m + k] = sums[at + 4]!;
      onBasis[m + k + 1] = sums[at + 5]!;
      onBasis[2 * m + k] = sums[at + 6]!;
      onBasis[2 * m + k + 1] = sums[at + 7]!;
      onBasis[3 * m + k] = sums[at + 8]!;
      onBasis[3 * m + k + 1] = sums[at + 9]!;
      localRhs[k] = sums[at + 10]!;
      localRhs[k + 1] = sums[at + 11]!;
    }
    for (let order = orders + 1; order <= 2 * orders; order++) {
      const at = 6 + 12 * orders + 2 * (order - orders - 1);
      cosSums[order] = sums[at]!;
      sinSums[order] = sums[at + 1]!;
    }
    cosSums[0] = size;
    for (let r = 0; r < m; r++) {
      const a = (r >> 1) + 1;
      for (let c = 0; c <= r; c++) {
        const b = (c >> 1) + 1;
        // Rows and columns alternate cos, sin of orders 1, 1, 2, 2 …
        const product =
          (r & 1) === 0
            ? (c & 1) === 0
              ? cosOf(a - b) + cosOf(a + b)
              : sinOf(a + b) - sinOf(a - b)
            : (c & 1) === 0
              ? sinOf(a + b) + sinOf(a - b)
              : cosOf(a - b) - cosOf(a + b);
        localNormal[r * m + c] = product / 2;
      }
    }
    const noiseRad = Math.sqrt(curvature / (6 * (size - 2)));
    const squares = phaseSquares - (p0 * p0 + p1 * p1 + p2 * p2 + p3 * p3);
    for (let r = 0; r < m; r++) {
      localRhs[r] -= onBasis[r]! * p0 + onBasis[m + r]! * p1 + onBasis[2 * m + r]! * p2 + onBasis[3 * m + r]! * p3;
      for (let c = 0; c <= r; c++) {
        let cross = 0;
        for (let q = 0; q < 4; q++) cross += onBasis[q * m + r]! * onBasis[q * m + c]!;
        localNormal[r * m + c] -= cross;
      }
    }
    // What the window's own cubic and harmonics leave: motion the cubic cannot follow, beyond the noise, would leak
    // into the shared harmonics; the periodic error itself is not part of it (the harmonics take it). Only a window
    // that spans the whole range can tell its harmonics from its cubic: in a shorter one (cut by its length) they
    // would soak up the misfit, so there what the cubic alone leaves must be within the bound.
    let explained = 0;
    if (spanned) {
      for (let r = 0; r < m; r++) for (let c = 0; c <= r; c++) work[r * m + c] = work[c * m + r] = localNormal[r * m + c]!;
      if (choleskyInPlace(work, m)) {
        solveFactored(work, localRhs, solved);
        for (let r = 0; r < m; r++) explained += solved[r]! * localRhs[r]!;
      }
    }
    const residualRad = Math.sqrt(Math.max(0, squares - explained) / size);
    const misfitRad = Math.sqrt(Math.max(0, residualRad ** 2 - noiseRad ** 2));
    if (!(misfitRad >= smallestMisfitRad)) smallestMisfitRad = misfitRad;
    if (misfitRad > maxMisfitRad) return;
    // Once every bin is reached, the windows that follow need not look (a pass with two floors a sample).
    for (let j = 0; j < size && reachedBins < bins; j++) {
      const wrapped = phase[j]! - TWO_PI * Math.floor(phase[j]! / TWO_PI);
      const bin = Math.min(bins - 1, Math.floor((wrapped / TWO_PI) * bins));
      reachedBins += 1 - reached[bin]!;
      reached[bin] = 1;
    }
    for (let r = 0; r < m; r++) {
      rhs[r] += localRhs[r]!;
      for (let c = 0; c <= r; c++) normal[r * m + c] += localNormal[r * m + c]!;
    }
    used++;
    samples += size;
  }

  /** Solves L·Lᵀ·x = b for the Cholesky factor in `factored` (m×m). */
  function solveFactored(factored: Float64Array, b: Float64Array, x: Float64Array): void {
    for (let r = 0; r < m; r++) {
      let sum = b[r]!;
      for (let k = 0; k < r; k++) sum -= factored[r * m + k]! * x[k]!;
      x[r] = sum / factored[r * m + r]!;
    }
    for (let r = m - 1; r >= 0; r--) {
      let sum = x[r]!;
      for (let k = r + 1; k < m; k++) sum -= factored[k * m + r]! * x[k]!;
      x[r] = sum / factored[r * m + r]!;
    }
  }

  function solveHarmonics(): boolean {
    for (let r = 0; r < m; r++) for (let c = 0; c <= r; c++) work[r * m + c] = work[c * m + r] = normal[r * m + c]!;
    if (used === 0 || !choleskyInPlace(work, m)) return false;
    solveFactored(work, rhs, solved);
    return true;
  }

  function binnedMeanRad(): Float64Array {
    const out = new Float64Array(bins).fill(NaN);
    if (!solveHarmonics()) return out;
    for (let b = 0; b < bins; b++) {
      const centre = ((b + 0.5) / bins) * TWO_PI;
      let e = 0;
      for (let k = 1; k <= orders; k++) e += solved[2 * k - 2]! * Math.cos(k * centre) + solved[2 * k - 1]! * Math.sin(k * centre);
      out[b] = e;
    }
    return out;
  }

  function summary(): PeriodicErrorSummary {
    const values = binnedMeanRad();
    let coverage = 0;
    for (let b = 0; b < bins; b++) coverage += reached[b]!;
    if (!Number.isFinite(values[0]!)) return { samples, binCoverage: coverage / bins, firstHarmonicRad: NaN, secondHarmonicRad: NaN, peakToPeakRad: NaN, rmsRad: NaN };
    let low = Infinity;
    let high = -Infinity;
    let squares = 0;
    for (let b = 0; b < bins; b++) {
      low = Math.min(low, values[b]!);
      high = Math.max(high, values[b]!);
      squares += values[b]! ** 2;
    }
    return {
      samples,
      binCoverage: coverage / bins,
      firstHarmonicRad: Math.hypot(solved[0]!, solved[1]!),
      secondHarmonicRad: orders >= 2 ? Math.hypot(solved[2]!, solved[3]!) : NaN,
      peakToPeakRad: high - low,
      rmsRad: Math.sqrt(squares / bins),
    };
  }

  return {
    process(unwrappedPhaseRad, valid, length) {
      // The window's count and range in locals, kept between calls: written to the closure's variables in the loop,
      // they cost a heap number a sample (16 bytes, and the collections they bring).
      let fill = filled, low = range[0]!, high = range[1]!;
      for (let i = 0; i < length; i++) {
        const p = unwrappedPhaseRad[i]!;
        if (!valid[i] || !Number.isFinite(p)) {
          fill = 0;
          continue;
        }
        if (fill === 0) low = high = p;
        else if (p < low) low = p;
        else if (p > high) high = p;
        phase[fill++] = p;
        const spanned = high - low >= windowSpanRad && fill >= MIN_WINDOW_SAMPLES;
        if (spanned || fill === capacity) {
          fitWindow(fill, spanned);
          fill = 0;
        }
      }
      filled = fill;
      range[0] = low;
      range[1] = high;
    },
    skip(length) {
      if (!(length > 0)) return;
      filled = 0;
    },
    summary,
    binnedMeanRad,
    get windows() {
      return { fitted, used, smallestMisfitRad };
    },
    options: Object.freeze({ orders, windowSpanRad, maxWindowSamples: capacity, bins, maxMisfitRad }),
    reset() {
      filled = 0;
      fitted = 0;
      used = 0;
      samples = 0;
      smallestMisfitRad = NaN;
      normal.fill(0);
      rhs.fill(0);
      reached.fill(0);
      reachedBins = 0;
    },
  };
}
