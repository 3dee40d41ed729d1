// Fit of 2, 3 or 4 detector outputs per axis, I_k = P(t)·(o_k + a_k·cos(φ − θ_k)), in accumulator form. With
// three or more DC-coupled outputs the source power P(t) is a linear combination of the outputs: the one with
// the least variance for a mean of 1 (it holds no fringe when P does not follow the phase). Dividing by it puts
// every sample on one fixed ellipse in the outputs' plane, which the two-channel ellipse fit then solves; the
// per-channel offset, gain and phase follow from both. Once they are known, (P, P·cos φ, P·sin φ) is the
// least-squares solution of a linear system for each sample (common practice in three-output demodulation of
// 3×3 couplers; symmetric couplers: Brown et al., Proc. SPIE 1584 (1991), memory).

import { validateCalibration } from '../correction.js';
import type { EllipseCalibration } from './ellipse.js';
import { resolveFitLimits } from './limits.js';
import { choleskyInPlace, symmetricEigenInPlace } from './numerics.js';
import { finiteNumber, integerInRange, OptionError, positiveFinite } from '../options.js';
import { wrapPhase } from '../phase.js';

/** Detector outputs per axis that fringetally combines. */
export const MIN_CHANNELS = 2;
export const MAX_CHANNELS = 4;

/**
 * One detector output: `I = P·(offset + amplitude·cos(φ − phaseRad))`. P is the source power relative to its
 * mean over the calibration capture (so offset and amplitude are in the output's own units at mean power).
 * Channel 1 defines the phase origin (its phaseRad is 0) and channel 2 the sense: its phaseRad lies in (0, π),
 * so positive displacement advances φ as it does in the two-channel convention, where channel 2 is
 * `y = amplitudeY·sin(φ + phaseErrorRad)`, i.e. phaseRad = π/2 − phaseErrorRad.
 */
export interface ChannelParameters {
  readonly offset: number;
  readonly amplitude: number;
  readonly phaseRad: number;
}

/** Checks a channel layout once: 2..4 channels, finite offsets, positive amplitudes, independent phases. */
export function validateChannelParameters(channels: readonly ChannelParameters[], name = 'channels'): readonly ChannelParameters[] {
  if (!Array.isArray(channels)) throw new OptionError(name, `an array of ${MIN_CHANNELS}..${MAX_CHANNELS} channel records`, channels);
  integerInRange(`${name}.length`, channels.length, MIN_CHANNELS, MAX_CHANNELS);
  const checked = channels.map((channel, k) => {
    if (channel === null || typeof channel !== 'object') throw new OptionError(`${name}[${k}]`, 'a record { offset, amplitude, phaseRad }', channel);
    return Object.freeze({
      offset: finiteNumber(`${name}[${k}].offset`, channel.offset),
      amplitude: positiveFinite(`${name}[${k}].amplitude`, channel.amplitude),
      phaseRad: finiteNumber(`${name}[${k}].phaseRad`, channel.phaseRad),
    });
  });
  if (checked.length === 2) {
    // The two-channel ellipse needs its second output strictly between in phase and in antiphase.
    ellipseOfChannels(checked, name);
  } else if (demodulationMatrix(checked, new Float64Array(3 * checked.length)) === false) {
    throw new OptionError(name, 'outputs whose offsets and phases make (P, P·cos φ, P·sin φ) solvable (not all in phase, not all offsets proportional)', channels);
  }
  return Object.freeze(checked);
}

/** The two-channel layout of an ellipse calibration (P ≡ 1). */
export function channelsOfEllipse(calibration: EllipseCalibration): readonly ChannelParameters[] {
  return [
    { offset: calibration.offsetX, amplitude: calibration.amplitudeX, phaseRad: 0 },
    { offset: calibration.offsetY, amplitude: calibration.amplitudeY, phaseRad: Math.PI / 2 - calibration.phaseErrorRad },
  ];
}

/** The ellipse of a two-channel layout; throws OptionError when channel 2 is not within (0, π) of channel 1. */
export function ellipseOfChannels(channels: readonly ChannelParameters[], name = 'channels'): EllipseCalibration {
  const [first, second] = channels as [ChannelParameters, ChannelParameters];
  const lead = wrapPhase(second.phaseRad - first.phaseRad);
  if (!(lead > 0 && lead < Math.PI)) {
    throw new OptionError(`${name}[1].phaseRad`, `a phase in (0, π) after channel 1's (got ${lead} rad after it)`, second.phaseRad);
  }
  return validateCalibration(
    { offsetX: first.offset, offsetY: second.offset, amplitudeX: first.amplitude, amplitudeY: second.amplitude, phaseErrorRad: Math.PI / 2 - lead },
    name,
  );
}

/** Inverts a 3×3 matrix (row-major) into `out`; false when it is singular to rounding. */
function invert3(m: Float64Array, out: Float64Array): boolean {
  const c00 = m[4]! * m[8]! - m[5]! * m[7]!;
  const c01 = m[5]! * m[6]! - m[3]! * m[8]!;
  const c02 = m[3]! * m[7]! - m[4]! * m[6]!;
  const det = m[0]! * c00 + m[1]! * c01 + m[2]! * c02;
  let size = 0;
  for (let k = 0; k < 9; k++) size = Math.max(size, Math.abs(m[k]!));
  if (!(Math.abs(det) > 1e-12 * size * size * size)) return false;
  out[0] = c00 / det;
  out[1] = (m[2]! * m[7]! - m[1]! * m[8]!) / det;
  out[2] = (m[1]! * m[5]! - m[2]! * m[4]!) / det;
  out[3] = c01 / det;
  out[4] = (m[0]! * m[8]! - m[2]! * m[6]!) / det;
  out[5] = (m[2]! * m[3]! - m[0]! * m[5]!) / det;
  out[6] = c02 / det;
  out[7] = (m[1]! * m[6]! - m[0]! * m[7]!) / det;
  out[8] = (m[0]! * m[4]! - m[1]! * m[3]!) / det;
  return true;
}

/**
 * The 3×K matrix W (row-major) that gives (P, P·cos φ, P·sin φ) = W·I for one sample of the K outputs: the
 * least-squares solution (MᵀM)⁻¹Mᵀ of M·z = I, M's row k being (o_k, a_k cos θ_k, a_k sin θ_k). For K = 3 it
 * is M⁻¹. Returns false when MᵀM is singular. Allocates two small arrays; called when a layout is set, not per block.
 */
export function demodulationMatrix(channels: readonly ChannelParameters[], out: Float64Array): Float64Array | false {
  const k = channels.length;
  const model = new Float64Array(3 * k);
  channels.forEach((channel, row) => {
    model[row * 3] = channel.offset;
    model[row * 3 + 1] = channel.amplitude * Math.cos(channel.phaseRad);
    model[row * 3 + 2] = channel.amplitude * Math.sin(channel.phaseRad);
  });
  const normal = new Float64Array(9);
  for (let i = 0; i < 3; i++) for (let j = 0; j < 3; j++) for (let r = 0; r < k; r++) normal[i * 3 + j] += model[r * 3 + i]! * model[r * 3 + j]!;
  const inverse = new Float64Array(9);
  if (!invert3(normal, inverse)) return false;
  for (let i = 0; i < 3; i++) {
    for (let c = 0; c < k; c++) {
      let sum = 0;
      for (let j = 0; j < 3; j++) sum += inverse[i * 3 + j]! * model[c * 3 + j]!;
      out[i * k + c] = sum;
    }
  }
  return out;
}

/**
 * How the outputs are reduced to a two-dimensional signal of constant power: P̂ = weights·I (1 on average over
 * the fit), x = basisX·(I/P̂ − mean), y = basisY·(I/P̂ − mean). The ellipse fit of (x, y) completes the layout.
 */
export interface PowerNormalisation {
  readonly channelCount: number;
  readonly weights: Float64Array;
  readonly mean: Float64Array;
  readonly basisX: Float64Array;
  readonly basisY: Float64Array;
  /** Relative RMS variation of P̂ over the fit: the source-power drift plus noise. */
  readonly powerVariation: number;
}

export type PowerNormalisationResult =
  | { readonly ok: true; readonly normalisation: PowerNormalisation; readonly samples: number }
  | { readonly ok: false; readonly reason: 'too-few-samples' | 'degenerate' | 'not-dc-coupled'; readonly message: string; readonly samples: number };

/** Largest relative RMS variation of the power estimate accepted: beyond it the outputs carry no usable mean (AC-coupled) or are not one interferometer's. */
export const MAX_POWER_VARIATION = 0.3;

const DEPENDENT = 'the outputs are linearly dependent or move along one line (a constant, repeated or missing channel)';

/** Column-major K×3 (row c, column a at c·3 + a): the three principal axes of C + m·mᵀ; for K = 3 the identity. */
function signalAxes(covariance: Float64Array, mean: Float64Array, k: number): Float64Array {
  const axes = new Float64Array(k * 3);
  if (k === 3) {
    axes[0] = axes[4] = axes[8] = 1;
    return axes;
  }
  const second = new Float64Array(k * k);
  for (let c = 0; c < k; c++) for (let e = 0; e < k; e++) second[c * k + e] = covariance[c * k + e]! + mean[c]! * mean[e]!;
  const values = new Float64Array(k);
  const vectors = new Float64Array(k * k);
  symmetricEigenInPlace(second, k, values, vectors);
  const order = Array.from(values.keys()).sort((a, b) => values[b]! - values[a]!);
  for (let c = 0; c < k; c++) for (let a = 0; a < 3; a++) axes[c * 3 + a] = vectors[c * k + order[a]!]!;
  return axes;
}

/**
 * The power normalisation in three dimensions from the covariance C and mean m: w = C⁻¹m / (mᵀC⁻¹m), the
 * combination with mean 1 and least variance (Lagrange; its variance is 1/(mᵀC⁻¹m)), and the two principal axes
 * of Π·C·Πᵀ, Π = 1 − m·wᵀ, which removes the power direction. Returns 'degenerate' or a refusal message.
 */
function solveReduced(covariance: Float64Array, mean: Float64Array): { weights: Float64Array; basisX: Float64Array; basisY: Float64Array; powerVariation: number } | string {
  const k = 3;
  const factor = Float64Array.from(covariance);
  if (!choleskyInPlace(factor, k)) return 'degenerate';
  const weights = Float64Array.from(mean);
  for (let r = 0; r < k; r++) {
    let sum = weights[r]!;
    for (let c = 0; c < r; c++) sum -= factor[r * k + c]! * weights[c]!;
    weights[r] = sum / factor[r * k + r]!;
  }
  for (let r = k - 1; r >= 0; r--) {
    let sum = weights[r]!;
    for (let c = r + 1; c < k; c++) sum -= factor[c * k + r]! * weights[c]!;
    weights[r] = sum / factor[r * k + r]!;
  }
  let quadratic = 0;
  for (let c = 0; c < k; c++) quadratic += mean[c]! * weights[c]!;
  const powerVariation = 1 / Math.sqrt(quadratic);
  if (!(powerVariation <= MAX_POWER_VARIATION)) {
    return `no steady combination of the outputs for the source power (it would vary by ${(powerVariation * 100).toFixed(1)} % RMS, limit ${MAX_POWER_VARIATION * 100} %): power normalisation needs DC-coupled outputs of one interferometer`;
  }
  for (let c = 0; c < k; c++) weights[c] = weights[c]! / quadratic;
  const projected = new Float64Array(k * k);
  for (let r = 0; r < k; r++) {
    for (let c = 0; c < k; c++) {
      let sum = 0;
      for (let a = 0; a < k; a++) {
        const pra = (r === a ? 1 : 0) - mean[r]! * weights[a]!;
        for (let b = 0; b < k; b++) sum += pra * covariance[a * k + b]! * ((c === b ? 1 : 0) - mean[c]! * weights[b]!);
      }
      projected[r * k + c] = sum;
    }
  }
  for (let r = 0; r < k; r++) {
    for (let c = r + 1; c < k; c++) {
      const average = 0.5 * (projected[r * k + c]! + projected[c * k + r]!);
      projected[r * k + c] = average;
      projected[c * k + r] = average;
    }
  }
  const values = new Float64Array(k);
  const vectors = new Float64Array(k * k);
  symmetricEigenInPlace(projected, k, values, vectors);
  const order = Array.from(values.keys()).sort((a, b) => values[b]! - values[a]!);
  if (!(values[order[1]!]! > 1e-12 * values[order[0]!]!)) return 'degenerate';
  const basisX = new Float64Array(k);
  const basisY = new Float64Array(k);
  for (let c = 0; c < k; c++) {
    basisX[c] = vectors[c * k + order[0]!]!;
    basisY[c] = vectors[c * k + order[1]!]!;
  }
  return { weights, basisX, basisY, powerVariation };
}

export interface ChannelMomentAccumulator {
  /** Adds `length` samples of each output (channels[k][i]); samples with any non-finite output are skipped and counted. */
  add(channels: readonly ArrayLike<number>[], length: number): void;
  /** Adds another accumulator's samples (same channel count), as if they had been added here. */
  merge(other: ChannelMomentAccumulator): void;
  reset(): void;
  /** The power normalisation from the first and second moments of the outputs. */
  solve(): PowerNormalisationResult;
  readonly channelCount: number;
  readonly samples: number;
  readonly skippedNonFinite: number;
  /** Raw sums about `shift`: first[k] = Σ(I_k − shift_k), second[k·K + l] = Σ(I_k − shift_k)(I_l − shift_l). */
  readonly state: { readonly shift: Float64Array; readonly first: Float64Array; readonly second: Float64Array; readonly count: number };
}

/**
 * Sums of the outputs and of their products (K + K² numbers, constant memory). Merging is exact: sums are kept
 * about the first sample seen, so their powers stay near the signals' own size.
 */
/** The ellipse fits' default, asked of them (stated there once; the embedded bundle has no room for a constant). */
const DEFAULT_FIT_MIN_SAMPLES = resolveFitLimits({}).minSamples;

export function createChannelMomentAccumulator(options: { readonly channelCount: number; readonly minSamples?: number }): ChannelMomentAccumulator {
  const k = integerInRange('channelCount', options.channelCount, 3, MAX_CHANNELS);
  const minSamples = integerInRange('minSamples', options.minSamples ?? DEFAULT_FIT_MIN_SAMPLES, 6, 2 ** 53 - 1);
  const shift = new Float64Array(k);
  const first = new Float64Array(k);
  const second = new Float64Array(k * k);
  const row = new Float64Array(k);
  let count = 0;
  let skipped = 0;
  let hasShift = false;

  function add(channels: readonly ArrayLike<number>[], length: number): void {
    for (let i = 0; i < length; i++) {
      let finite = true;
      for (let c = 0; c < k; c++) {
        const value = channels[c]![i]!;
        if (value - value !== 0) finite = false;
        row[c] = value;
      }
      if (!finite) {
        skipped++;
        continue;
      }
      if (!hasShift) {
        shift.set(row);
        hasShift = true;
      }
      for (let c = 0; c < k; c++) row[c] = row[c]! - shift[c]!;
      for (let c = 0; c < k; c++) {
        const rc = row[c]!;
        first[c] += rc;
        for (let d = c; d < k; d++) second[c * k + d] += rc * row[d]!;
      }
      count++;
    }
  }

  function merge(other: ChannelMomentAccumulator): void {
    if (other.channelCount !== k) throw new OptionError('other.channelCount', `${k}, the channel count of this accumulator`, other.channelCount);
    skipped += other.skippedNonFinite;
    const theirs = other.state;
    if (theirs.count === 0) return;
    if (!hasShift) {
      shift.set(theirs.shift);
      hasShift = true;
    }
    // Σ(I − s)(I − s)ᵀ from Σ(I − t)(I − t)ᵀ with d = t − s: add d·Σ(I − t)ᵀ, its transpose and n·d·dᵀ.
    for (let c = 0; c < k; c++) {
      const dc = theirs.shift[c]! - shift[c]!;
      for (let e = c; e < k; e++) {
        const de = theirs.shift[e]! - shift[e]!;
        second[c * k + e] += theirs.second[c * k + e]! + dc * theirs.first[e]! + de * theirs.first[c]! + theirs.count * dc * de;
      }
      first[c] += theirs.first[c]! + theirs.count * dc;
    }
    count += theirs.count;
  }

  function fail(reason: 'too-few-samples' | 'degenerate' | 'not-dc-coupled', message: string): PowerNormalisationResult {
    return { ok: false, reason, message, samples: count };
  }

  function solve(): PowerNormalisationResult {
    if (count < minSamples) return fail('too-few-samples', `too few samples: ${count} < ${minSamples}`);
    const mean = new Float64Array(k);
    const covariance = new Float64Array(k * k);
    for (let c = 0; c < k; c++) mean[c] = shift[c]! + first[c]! / count;
    for (let c = 0; c < k; c++) {
      for (let e = c; e < k; e++) {
        const value = second[c * k + e]! / count - (first[c]! / count) * (first[e]! / count);
        covariance[c * k + e] = value;
        covariance[e * k + c] = value;
      }
    }
    // Four outputs span only three dimensions (P, P·cos φ, P·sin φ) plus noise: the fit works in the three
    // principal axes of the uncentred moments E[I·Iᵀ] = C + m·mᵀ, so that the solved functionals lie in the
    // signal's own subspace (their pseudo-inverse is then the channel model) and the noise axis cannot pose as power.
    const axes = signalAxes(covariance, mean, k);
    const reducedMean = new Float64Array(3);
    const reduced = new Float64Array(9);
    for (let a = 0; a < 3; a++) {
      for (let c = 0; c < k; c++) reducedMean[a] += axes[c * 3 + a]! * mean[c]!;
      for (let b = 0; b < 3; b++) {
        let sum = 0;
        for (let c = 0; c < k; c++) for (let e = 0; e < k; e++) sum += axes[c * 3 + a]! * covariance[c * k + e]! * axes[e * 3 + b]!;
        reduced[a * 3 + b] = sum;
      }
    }
    const solved = solveReduced(reduced, reducedMean);
    if (typeof solved === 'string') return fail(solved === 'degenerate' ? 'degenerate' : 'not-dc-coupled', solved === 'degenerate' ? DEPENDENT : solved);
    const weights = new Float64Array(k);
    const basisX = new Float64Array(k);
    const basisY = new Float64Array(k);
    for (let c = 0; c < k; c++) {
      for (let a = 0; a < 3; a++) {
        weights[c] += axes[c * 3 + a]! * solved.weights[a]!;
        basisX[c] += axes[c * 3 + a]! * solved.basisX[a]!;
        basisY[c] += axes[c * 3 + a]! * solved.basisY[a]!;
      }
    }
    return { ok: true, normalisation: { channelCount: k, weights, mean, basisX, basisY, powerVariation: solved.powerVariation }, samples: count };
  }

  function reset(): void {
    shift.fill(0);
    first.fill(0);
    second.fill(0);
    count = 0;
    skipped = 0;
    hasShift = false;
  }

  reset();
  return {
    add,
    merge,
    reset,
    solve,
    channelCount: k,
    get samples() {
      return count;
    },
    get skippedNonFinite() {
      return skipped;
    },
    get state() {
      return { shift, first, second, count };
    },
  };
}

/**
 * Writes the power-normalised two-dimensional signal (x, y) and the power estimate P̂ of `length` samples, ready
 * for an ellipse fit. Non-finite outputs give NaN. Allocates nothing.
 */
export function normaliseChannels(
  normalisation: PowerNormalisation,
  channels: readonly ArrayLike<number>[],
  length: number,
  x: Float64Array,
  y: Float64Array,
  power: Float64Array,
): number {
  const { channelCount: k, weights, mean, basisX, basisY } = normalisation;
  for (let i = 0; i < length; i++) {
    let p = 0;
    let sx = 0;
    let sy = 0;
    let mx = 0;
    let my = 0;
    for (let c = 0; c < k; c++) {
      const value = channels[c]![i]!;
      p += weights[c]! * value;
      sx += basisX[c]! * value;
      sy += basisY[c]! * value;
      mx += basisX[c]! * mean[c]!;
      my += basisY[c]! * mean[c]!;
    }
    power[i] = p;
    x[i] = sx / p - mx;
    y[i] = sy / p - my;
  }
  return length;
}

/**
 * Every output's offset, gain and phase from the power normalisation and the ellipse fitted to its (x, y), in
 * the convention of `ChannelParameters` (channel 1 at phase 0, channel 2 within (0, π) after it).
 */
export function channelParametersOf(normalisation: PowerNormalisation, ellipse: EllipseCalibration): ChannelParameters[] {
  const { channelCount: k, weights, mean, basisX, basisY } = normalisation;
  const { offsetX, offsetY, amplitudeX, amplitudeY, phaseErrorRad } = ellipse;
  // x + basisX·mean = basisX·I/P̂ = oX' + aX·c and likewise y: with T = [w; basisX; basisY], T·I = P̂·B·(1, c, s)ᵀ
  // for the lower-triangular B below, so W = B⁻¹·T gives (P̂, P̂c, P̂s) and M is its pseudo-inverse.
  let mx = 0;
  let my = 0;
  for (let c = 0; c < k; c++) {
    mx += basisX[c]! * mean[c]!;
    my += basisY[c]! * mean[c]!;
  }
  const oX = offsetX + mx;
  const oY = offsetY + my;
  const w = new Float64Array(3 * k);
  for (let c = 0; c < k; c++) {
    const cosRow = (basisX[c]! - oX * weights[c]!) / amplitudeX;
    w[c] = weights[c]!;
    w[k + c] = cosRow;
    w[2 * k + c] = (basisY[c]! - oY * weights[c]! - amplitudeY * Math.sin(phaseErrorRad) * cosRow) / (amplitudeY * Math.cos(phaseErrorRad));
  }
  // M = Wᵀ(WWᵀ)⁻¹.
  const gram = new Float64Array(9);
  for (let i = 0; i < 3; i++) for (let j = 0; j < 3; j++) for (let c = 0; c < k; c++) gram[i * 3 + j] += w[i * k + c]! * w[j * k + c]!;
  const inverse = new Float64Array(9);
  invert3(gram, inverse);
  const raw = [];
  for (let c = 0; c < k; c++) {
    const m = [0, 0, 0];
    for (let j = 0; j < 3; j++) for (let i = 0; i < 3; i++) m[j] += w[i * k + c]! * inverse[i * 3 + j]!;
    raw.push({ offset: m[0]!, amplitude: Math.hypot(m[1]!, m[2]!), phaseRad: Math.atan2(m[2]!, m[1]!) });
  }
  const origin = raw[0]!.phaseRad;
  const sense = wrapPhase(raw[1]!.phaseRad - origin) >= 0 ? 1 : -1;
  return raw.map((channel) => ({ ...channel, phaseRad: sense * wrapPhase(channel.phaseRad - origin) }));
}
