// Overlapping Allan deviation of a sampled quantity against averaging time (D. W. Allan, "Statistics of atomic
// frequency standards", Proc. IEEE 54(2), 221–230, 1966; the overlapping estimator as defined in IEEE Std 1139
// and W. J. Riley, NIST Special Publication 1065, 2008, memory for the equation numbers). Here the quantity is a
// position: σ(τ) says how much the mean position over τ moves from one τ to the next.

import { integerInRange, OptionError, positiveFinite } from './options.js';

export interface AllanDeviation {
  /** Averaging times, s: m · tau0S. */
  readonly tauS: Float64Array;
  /** Overlapping Allan deviation at each τ, in the unit of the values. */
  readonly deviation: Float64Array;
  /** Squared differences averaged for each τ (M − 2m + 1): few terms mean a wide confidence interval. */
  readonly terms: Float64Array;
}

/**
 * Averaging factors m = 1 … ⌊(M − 1)/2⌋, spaced evenly in log(m) with about `perDecade` per decade, no repeats.
 * M = `length`, the number of values; the largest m leaves at least one difference of two adjacent means.
 */
export function allanAveragingFactors(length: number, perDecade = 10): Float64Array {
  integerInRange('length', length, 0, 2 ** 53 - 1);
  integerInRange('perDecade', perDecade, 1, 1000);
  const largest = Math.floor((length - 1) / 2);
  const factors: number[] = [];
  for (let k = 0; ; k++) {
    const m = Math.round(10 ** (k / perDecade));
    if (m > largest) break;
    if (factors.length === 0 || m > factors[factors.length - 1]!) factors.push(m);
  }
  return Float64Array.from(factors);
}

/**
 * The overlapping Allan deviation of `length` values spaced tau0S apart, at the averaging factors m:
 * σ²(mτ₀) = 1 / (2 (M − 2m + 1)) · Σ_j (ȳ_{j+m} − ȳ_j)², where ȳ_j is the mean of y_j … y_{j+m−1} and j runs over
 * all M − 2m + 1 starts (the overlapping form: every start, not only multiples of m). Written with running sums,
 * so each τ costs O(M). Non-finite values make the deviation NaN: the estimator needs gap-free data.
 */
export function overlappingAllanDeviation(values: ArrayLike<number>, length: number, tau0S: number, factors: ArrayLike<number>): AllanDeviation {
  integerInRange('length', length, 0, values.length);
  positiveFinite('tau0S', tau0S);
  // Running sums about the first value keep the differences of means free of the cancellation a large offset
  // (a position far from zero) would cause.
  const origin = length > 0 ? values[0]! : 0;
  const sums = new Float64Array(length + 1);
  for (let i = 0; i < length; i++) sums[i + 1] = sums[i]! + (values[i]! - origin);
  const count = factors.length;
  const tauS = new Float64Array(count);
  const deviation = new Float64Array(count);
  const terms = new Float64Array(count);
  for (let f = 0; f < count; f++) {
    const m = integerInRange('factors[]', factors[f], 1, Math.max(1, Math.floor((length - 1) / 2)));
    const n = length - 2 * m + 1;
    let total = 0;
    for (let j = 0; j < n; j++) {
      const difference = (sums[j + 2 * m]! - 2 * sums[j + m]! + sums[j]!) / m;
      total += difference * difference;
    }
    tauS[f] = m * tau0S;
    deviation[f] = n > 0 ? Math.sqrt(total / (2 * n)) : Number.NaN;
    terms[f] = Math.max(0, n);
  }
  return { tauS, deviation, terms };
}

export interface AveragingDecimatorOptions {
  /** Largest number of values kept; an even integer in 16..2^26. Default 2^20. */
  readonly maxValues?: number;
}

/**
 * Keeps a long series in bounded memory for the Allan deviation: it stores means of `stride` consecutive inputs,
 * and when the store is full it averages neighbours pairwise and doubles the stride. Means of means over equal
 * counts are means of the inputs, so the Allan deviation of the stored series at τ = m · stride / rate uses the
 * same averages as the full series, from every stride-th start instead of every start.
 */
export interface AveragingDecimator {
  add(values: ArrayLike<number>, length: number): void;
  /** Inputs per stored value (a power of two). */
  readonly stride: number;
  /** Stored means so far (a view, valid until the next add). */
  values(): Float64Array;
  reset(): void;
}

export function createAveragingDecimator(options: AveragingDecimatorOptions = {}): AveragingDecimator {
  const maxValues = integerInRange('maxValues', options.maxValues ?? 2 ** 20, 16, 2 ** 26);
  if (maxValues % 2 !== 0) throw new OptionError('maxValues', 'an even integer in 16..67108864', maxValues);
  const store = new Float64Array(maxValues);
  let count = 0;
  let stride = 1;
  let pending = 0;
  let pendingSum = 0;
  return {
    add(values, length) {
      let sum = pendingSum;
      let inSum = pending;
      for (let i = 0; i < length; i++) {
        sum += values[i]!;
        if (++inSum === stride) {
          store[count++] = sum / stride;
          sum = 0;
          inSum = 0;
          if (count === maxValues) {
            const half = count >> 1;
            for (let k = 0; k < half; k++) store[k] = 0.5 * (store[2 * k]! + store[2 * k + 1]!);
            count = half;
            stride *= 2;
          }
        }
      }
      pendingSum = sum;
      pending = inSum;
    },
    get stride() {
      return stride;
    },
    values() {
      return store.subarray(0, count);
    },
    reset() {
      count = 0;
      stride = 1;
      pending = 0;
      pendingSum = 0;
    },
  };
}
