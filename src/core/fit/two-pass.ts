// The fit calibrate, replay and listen make: two passes over the same samples, the second keeping only the
// samples near the first pass's ellipse, so that a blocked beam (samples near the centre) or a glitch does not
// pull the fit. The caller feeds the samples once per pass, so a file is read twice and nothing is stored. With 3 or
// 4 detector outputs a pass before them finds the source power (createDetectorFit), so a file is read three times.

import { createCorrection } from '../correction.js';
import { createEllipseAccumulator, type EllipseAccumulator } from './accumulator.js';
import type { EllipseCalibration, EllipseFitResult } from './ellipse.js';
import { createEllipseFit, type EllipseFitMethodOptions } from './methods.js';
import {
  channelParametersOf,
  createChannelMomentAccumulator,
  MAX_CHANNELS,
  MIN_CHANNELS,
  normaliseChannels,
  type ChannelParameters,
  type PowerNormalisation,
} from './channel-fit.js';
import { integerInRange, OptionError } from '../options.js';

/** Corrected radii kept by the second pass: within [1 − GATE, 1 + GATE] of the first fit's radius. */
const GATE = 0.5;
const CHUNK = 4096;

export interface TwoPassFit {
  /** 1 while every finite sample is summed; 2 while only those near the first pass's ellipse are. */
  readonly pass: 1 | 2;
  /** Adds `length` sample pairs to the current pass. Never allocates. */
  add(x: ArrayLike<number>, y: ArrayLike<number>, length: number): void;
  /**
   * Ends the current pass. After the first: the first fit when it failed, else null, and the caller feeds the
   * same samples again. After the second: the refined fit.
   */
  endPass(): EllipseFitResult | null;
  /** The first pass's ellipse while the second pass runs, else null. */
  readonly gate: EllipseCalibration | null;
  reset(): void;
}

/**
 * Copies the pairs of [start, end) whose corrected radius hypot(u, v) lies in [lowRadius, highRadius] to keptX,
 * keptY and returns their count; u, v from `coefficients` as `correctionCoefficients` writes them (u = c0·x + c1,
 * v = c2·x + c3·y + c4), as `Correction.process` computes them. Compares u² + v² with the squared radii and defers
 * to Math.hypot within a millionth of either, so the decisions are hypot's (both lie within a few ulps of the
 * exact radius) without a square root per pair. A kept pair has a finite radius, so both its values are finite.
 */
export function keepWithin(
  x: ArrayLike<number>,
  y: ArrayLike<number>,
  start: number,
  end: number,
  coefficients: Float64Array,
  lowRadius: number,
  highRadius: number,
  keptX: Float64Array,
  keptY: Float64Array,
): number {
  const kux = coefficients[0]!, ku0 = coefficients[1]!, kvx = coefficients[2]!, kvy = coefficients[3]!, kv0 = coefficients[4]!;
  const low2 = lowRadius * lowRadius, high2 = highRadius * highRadius;
  const surelyAbove = low2 * (1 + 1e-6), surelyBelow = low2 * (1 - 1e-6), surelyUnder = high2 * (1 - 1e-6), surelyOver = high2 * (1 + 1e-6);
  let kept = 0;
  for (let i = start; i < end; i++) {
    const xi = x[i]!;
    const yi = y[i]!;
    const u = kux * xi + ku0;
    const v = kvx * xi + kvy * yi + kv0;
    const r2 = u * u + v * v;
    if (!(r2 > surelyAbove && r2 < surelyUnder)) {
      if (r2 < surelyBelow || r2 > surelyOver) continue;
      const radius = Math.hypot(u, v);
      if (!(radius >= lowRadius && radius <= highRadius)) continue;
    }
    keptX[kept] = xi;
    keptY[kept] = yi;
    kept++;
  }
  return kept;
}

/** Options of `createTwoPassFit` (and of `createDetectorFit`): those of `createEllipseFit`, and where the sums are kept. */
export interface TwoPassFitOptions extends EllipseFitMethodOptions {
  /**
   * The accumulator of the passes' sums, reset by the fit; default a new `createEllipseAccumulator`. Any
   * accumulator that keeps the same sums gives the same fit: src/accel's `createFastEllipseAccumulator` does,
   * faster.
   */
  readonly accumulator?: EllipseAccumulator;
}

/** Options as `createEllipseFit` (method default 'hyper'), plus the accumulator. */
export function createTwoPassFit(options: TwoPassFitOptions = {}): TwoPassFit {
  const { accumulator: given, ...fitOptions } = options;
  const fit = createEllipseFit(fitOptions);
  const accumulator = given ?? createEllipseAccumulator(fitOptions);
  accumulator.reset();
  const correction = createCorrection();
  const keptX = new Float64Array(CHUNK);
  const keptY = new Float64Array(CHUNK);
  let gate: EllipseCalibration | null = null;

  function add(x: ArrayLike<number>, y: ArrayLike<number>, length: number): void {
    if (gate === null) {
      accumulator.add(x, y, length);
      return;
    }
    for (let start = 0; start < length; start += CHUNK) {
      const kept = keepWithin(x, y, start, Math.min(length, start + CHUNK), correction.coefficients, 1 - GATE, 1 + GATE, keptX, keptY);
      accumulator.add(keptX, keptY, kept);
    }
  }

  function endPass(): EllipseFitResult | null {
    const result = fit.solve(accumulator);
    accumulator.reset();
    if (gate !== null || !result.ok) {
      gate = null;
      correction.setCalibration(null);
      return result;
    }
    gate = result.calibration;
    correction.setCalibration(gate);
    return null;
  }

  function reset(): void {
    accumulator.reset();
    gate = null;
    correction.setCalibration(null);
  }

  return {
    add,
    endPass,
    reset,
    get pass() {
      return gate === null ? 1 : 2;
    },
    get gate() {
      return gate;
    },
  };
}

/**
 * A fit of 2, 3 or 4 detector outputs: for 3 or 4, the ellipse of the power-normalised pair and every output's
 * offset, gain and phase (`channels`, the layout a calibration file of them records); absent for a pair.
 */
export type DetectorFitResult = EllipseFitResult & { readonly channels?: readonly ChannelParameters[] };

export interface DetectorFit {
  readonly channelCount: number;
  /**
   * 0 while the source-power combination of 3 or 4 outputs is summed (`createChannelMomentAccumulator`), then 1
   * and 2 as `TwoPassFit`'s passes (over the power-normalised pair for 3 or 4 outputs).
   */
  readonly pass: 0 | 1 | 2;
  /** Adds `length` samples of every output (`channels[k][i]`, as many arrays as `channelCount`) to the current pass. */
  add(channels: readonly ArrayLike<number>[], length: number): void;
  /**
   * Ends the current pass: null while the caller must feed the same samples again, else the result (a failure
   * as soon as a pass fails).
   */
  endPass(): DetectorFitResult | null;
  reset(): void;
}

/**
 * The fit calibrate and listen make of one axis, whatever its output count: the two-pass gated fit of a pair, or,
 * for 3 or 4 outputs, a first pass that finds the source power as the steadiest combination of the outputs, then
 * the two-pass fit of the power-normalised pair. Constant memory apart from a scratch pair as long as the longest
 * block added. Options as `createTwoPassFit`, plus `channelCount` (integer 2..4).
 */
export function createDetectorFit(options: TwoPassFitOptions & { readonly channelCount: number }): DetectorFit {
  const { channelCount, ...fitOptions } = options;
  const k = integerInRange('channelCount', channelCount, MIN_CHANNELS, MAX_CHANNELS);
  const fit = createTwoPassFit(fitOptions);
  const moments = k > 2 ? createChannelMomentAccumulator({ channelCount: k }) : null;
  let normalisation: PowerNormalisation | null = null;
  let pairX = new Float64Array(0);
  let pairY = pairX;
  let power = pairX;

  function add(channels: readonly ArrayLike<number>[], length: number): void {
    if (channels.length !== k) throw new OptionError('channels', `${k} sample arrays, one per output`, channels.length);
    if (moments === null) fit.add(channels[0]!, channels[1]!, length);
    else if (normalisation === null) moments.add(channels, length);
    else {
      if (pairX.length < length) {
        pairX = new Float64Array(length);
        pairY = new Float64Array(length);
        power = new Float64Array(length);
      }
      normaliseChannels(normalisation, channels, length, pairX, pairY, power);
      fit.add(pairX, pairY, length);
    }
  }

  function endPass(): DetectorFitResult | null {
    if (moments !== null && normalisation === null) {
      const solved = moments.solve();
      moments.reset();
      if (!solved.ok) {
        const reason = solved.reason === 'too-few-samples' ? 'too-few-samples' : 'degenerate';
        return { ok: false, reason, message: solved.message, samples: solved.samples, coverage: Number.NaN };
      }
      normalisation = solved.normalisation;
      return null;
    }
    const result = fit.endPass();
    if (result === null || !result.ok || normalisation === null) return result;
    const channels = channelParametersOf(normalisation, result.calibration);
    normalisation = null;
    return { ...result, channels };
  }

  function reset(): void {
    fit.reset();
    moments?.reset();
    normalisation = null;
  }

  return {
    channelCount: k,
    get pass() {
      return moments !== null && normalisation === null ? 0 : fit.pass;
    },
    add,
    endPass,
    reset,
  };
}
