// Error of a measured position against a known true position (a simulation's truth, a reference instrument):
// maximum and RMS error, a straight-line trend against position (offset and scale error), and the periodic error
// that is left once the trend is removed, binned by fringe phase. Constant memory for any length.
// The trend is fitted by least squares together with the first two harmonics of the fringe phase: over a few
// fringes a periodic error correlates with position, and a straight line fitted alone would take part of it as a
// scale error (by −6a/(π N² λ_f) for amplitude a over N fringes of length λ_f).
import { integerInRange, positiveFinite } from './options.js';

const TWO_PI = 2 * Math.PI;

export interface TruthComparisonOptions {
  /** Length per fringe, m (λ_vac / (fold · n)); sets the phase of each sample for the periodic error. Positive. */
  readonly metresPerFringe: number;
  /** Phase bins per fringe for the periodic error; integer 8..4096, default 64. */
  readonly bins?: number;
}

export interface TruthComparisonSummary {
  /** Samples compared (both values finite). */
  readonly samples: number;
  /** Largest |measured − true| after both are zeroed at the first compared sample, m; NaN without samples. */
  readonly maxAbsErrorM: number;
  readonly rmsErrorM: number;
  /** Least-squares line error = offsetM + scaleError · (true position since the first sample). */
  readonly trend: { readonly offsetM: number; readonly scaleError: number };
  /** The error less its trend, averaged per phase bin: peak-to-peak, RMS over the bins and the 1st and 2nd harmonic amplitudes, m. */
  readonly periodic: {
    readonly peakToPeakM: number;
    readonly rmsM: number;
    readonly firstHarmonicM: number;
    readonly secondHarmonicM: number;
    /** Fraction of the phase bins that held samples. */
    readonly binCoverage: number;
  };
}

export interface TruthComparison {
  /** Adds `length` pairs; pairs with a non-finite value are skipped. */
  add(measuredM: ArrayLike<number>, trueM: ArrayLike<number>, length: number): void;
  summary(): TruthComparisonSummary;
  reset(): void;
}

export function createTruthComparison(options: TruthComparisonOptions): TruthComparison {
  const metresPerFringe = positiveFinite('metresPerFringe', options.metresPerFringe);
  const bins = integerInRange('bins', options.bins ?? 64, 8, 4096);
  const binSumError = new Float64Array(bins);
  const binSumPosition = new Float64Array(bins);
  const binCount = new Float64Array(bins);
  // count, Σe², max|e|, zero of measured, zero of true
  const sums = new Float64Array(5);
  // Normal equations of e = c0 + c1·(p/λ_f) + c2 cos φ + c3 sin φ + c4 cos 2φ + c5 sin 2φ: Σ f_j f_k and Σ f_j e.
  const normal = new Float64Array(BASIS * BASIS);
  const right = new Float64Array(BASIS);
  const f = new Float64Array(BASIS);

  function reset(): void {
    normal.fill(0);
    right.fill(0);
    binSumError.fill(0);
    binSumPosition.fill(0);
    binCount.fill(0);
    sums.fill(0);
  }

  function add(measuredM: ArrayLike<number>, trueM: ArrayLike<number>, length: number): void {
    let count = sums[0]!, see = sums[1]!, worst = sums[2]!, zeroMeasured = sums[3]!, zeroTrue = sums[4]!;
    const binPerMetre = bins / metresPerFringe;
    for (let i = 0; i < length; i++) {
      const m = measuredM[i]!;
      const t = trueM[i]!;
      if (!(Number.isFinite(m) && Number.isFinite(t))) continue;
      if (count === 0) {
        zeroMeasured = m;
        zeroTrue = t;
      }
      const p = t - zeroTrue;
      const e = m - zeroMeasured - p;
      count++;
      see += e * e;
      const magnitude = Math.abs(e);
      if (magnitude > worst) worst = magnitude;
      const phase = (TWO_PI * p) / metresPerFringe;
      const c = Math.cos(phase);
      const si = Math.sin(phase);
      f[0] = 1;
      f[1] = p / metresPerFringe;
      f[2] = c;
      f[3] = si;
      f[4] = c * c - si * si;
      f[5] = 2 * c * si;
      for (let j = 0; j < BASIS; j++) {
        const fj = f[j]!;
        right[j] += fj * e;
        for (let k = j; k < BASIS; k++) normal[j * BASIS + k] += fj * f[k]!;
      }
      const scaled = p * binPerMetre;
      const bin = Math.min(bins - 1, Math.floor(scaled - bins * Math.floor(scaled / bins)));
      binSumError[bin] += e;
      binSumPosition[bin] += p;
      binCount[bin] += 1;
    }
    sums[0] = count;
    sums[1] = see;
    sums[2] = worst;
    sums[3] = zeroMeasured;
    sums[4] = zeroTrue;
  }

  function summary(): TruthComparisonSummary {
    const count = sums[0]!;
    const see = sums[1]!;
    const worst = sums[2]!;
    if (count === 0) {
      const none = Number.NaN;
      return { samples: 0, maxAbsErrorM: none, rmsErrorM: none, trend: { offsetM: none, scaleError: none }, periodic: { peakToPeakM: none, rmsM: none, firstHarmonicM: none, secondHarmonicM: none, binCoverage: 0 } };
    }
    const coefficients = solveDroppingDegenerate(normal, right);
    const offsetM = coefficients[0]!;
    const scaleError = coefficients[1]! / metresPerFringe;
    const values = new Float64Array(bins);
    let filled = 0;
    let mean = 0;
    for (let b = 0; b < bins; b++) {
      if (binCount[b] === 0) continue;
      values[b] = binSumError[b]! / binCount[b]! - offsetM - (scaleError * binSumPosition[b]!) / binCount[b]!;
      mean += values[b]!;
      filled++;
    }
    mean /= filled;
    let low = Infinity, high = -Infinity, squares = 0, re1 = 0, im1 = 0, re2 = 0, im2 = 0;
    for (let b = 0; b < bins; b++) {
      if (binCount[b] === 0) continue;
      const value = values[b]! - mean;
      const phase = ((b + 0.5) / bins) * TWO_PI;
      low = Math.min(low, value);
      high = Math.max(high, value);
      squares += value * value;
      re1 += value * Math.cos(phase);
      im1 += value * Math.sin(phase);
      re2 += value * Math.cos(2 * phase);
      im2 += value * Math.sin(2 * phase);
    }
    return {
      samples: count,
      maxAbsErrorM: worst,
      rmsErrorM: Math.sqrt(see / count),
      trend: { offsetM, scaleError },
      periodic: {
        peakToPeakM: high - low,
        rmsM: Math.sqrt(squares / filled),
        firstHarmonicM: (2 * Math.hypot(re1, im1)) / filled,
        secondHarmonicM: (2 * Math.hypot(re2, im2)) / filled,
        binCoverage: filled / bins,
      },
    };
  }

  reset();
  return { add, summary, reset };
}

const BASIS = 6;

/**
 * Solves the symmetric normal equations (upper triangle given) by elimination on the diagonal. A basis function
 * the data cannot tell from the others (no motion: no slope; under a fringe: no harmonics) has a vanishing pivot;
 * its coefficient is set to 0 and it drops out.
 */
function solveDroppingDegenerate(upper: Float64Array, right: Float64Array): Float64Array {
  const n = BASIS;
  const m = new Float64Array(n * n);
  for (let j = 0; j < n; j++) for (let k = j; k < n; k++) m[j * n + k] = m[k * n + j] = upper[j * n + k]!;
  const b = Float64Array.from(right);
  const scale = Float64Array.from({ length: n }, (_, j) => m[j * n + j]!);
  const dropped = new Uint8Array(n);
  for (let k = 0; k < n; k++) {
    const pivot = m[k * n + k]!;
    if (!(pivot > 1e-10 * scale[k]!) || !(scale[k]! > 0)) {
      dropped[k] = 1;
      continue;
    }
    for (let r = k + 1; r < n; r++) {
      const factor = m[r * n + k]! / pivot;
      if (factor === 0) continue;
      for (let c = k; c < n; c++) m[r * n + c] -= factor * m[k * n + c]!;
      b[r] -= factor * b[k]!;
    }
  }
  const x = new Float64Array(n);
  for (let k = n - 1; k >= 0; k--) {
    if (dropped[k]) continue;
    let sum = b[k]!;
    for (let c = k + 1; c < n; c++) sum -= m[k * n + c]! * x[c]!;
    x[k] = sum / m[k * n + k]!;
  }
  return x;
}
