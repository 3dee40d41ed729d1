// The fit calibrate, replay and listen make: two passes over the same samples, the second keeping only the
// samples near the first pass's ellipse, so that a blocked beam (samples near the centre) or a glitch does not
// pull the fit. The caller feeds the samples once per pass, so a file is read twice and nothing is stored. With 3 or
// 4 detector outputs a pass before them finds the source power (createDetectorFit), so a file is read three times.

import { correctionCoefficients, createCorrection } from '../correction.js';
import { createEllipseAccumulator, type EllipseAccumulator } from './accumulator.js';
import type { AccumulatorState } from './coverage.js';
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
/** Pairs gated at a time; `EllipseAccumulator.addWithin` gates as many. */
const CHUNK = 4096;

export interface TwoPassFit {
  /** 1 while every finite sample is summed; 2 while only those near the first pass's ellipse are. */
  readonly pass: 1 | 2;
  /** Adds `length` sample pairs to the current pass. Never allocates. */
  add(x: ArrayLike<number>, y: ArrayLike<number>, length: number): void;
  /**
   * Ends the current pass. After the first: the first fit when it failed, else null, and the caller feeds the
   * same samples again. After the second: the refined fit.
   *
   * `part` (first pass only): the samples fed were a part of the capture (e.g. `spreadWindows`), so the gate they
   * give is provisional. A part's failed fit gives null and the first pass is made again over every sample. With
   * a provisional gate the second pass also sums every sample ungated (the first pass over all of them) and
   * watches the pairs within BAND (0.02 of the radius) of the gate's bounds; at its end, when that first pass
   * fails, its failure is the result; when no pair came within the bands and the gate of every sample differs
   * from the provisional one by less than BAND in radius over the samples' range, both gates keep the same
   * samples and the second pass's fit is the result, the same as from the first pass over every sample; else
   * null, and the caller feeds the samples a third time, gated by the first pass over every sample. The result
   * is the same as without `part` in every case.
   */
  endPass(part?: boolean): EllipseFitResult | null;
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
 * Adds to near[0] the count of pairs whose u² + v² lies within `band` (in radius) of either bound.
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
  band: number,
  near: Float64Array,
): number {
  const kux = coefficients[0]!, ku0 = coefficients[1]!, kvx = coefficients[2]!, kvy = coefficients[3]!, kv0 = coefficients[4]!;
  const low2 = lowRadius * lowRadius, high2 = highRadius * highRadius;
  const surelyAbove = low2 * (1 + 1e-6), surelyBelow = low2 * (1 - 1e-6), surelyUnder = high2 * (1 - 1e-6), surelyOver = high2 * (1 + 1e-6);
  const lowIn = (lowRadius - band) ** 2, lowOut = (lowRadius + band) ** 2, highIn = (highRadius - band) ** 2, highOut = (highRadius + band) ** 2;
  let kept = 0;
  let nearBounds = 0;
  for (let i = start; i < end; i++) {
    const xi = x[i]!;
    const yi = y[i]!;
    const u = kux * xi + ku0;
    const v = kvx * xi + kvy * yi + kv0;
    const r2 = u * u + v * v;
    if (!(r2 < lowIn || r2 > highOut || (r2 > lowOut && r2 < highIn)) && r2 === r2) nearBounds++;
    if (!(r2 > surelyAbove && r2 < surelyUnder)) {
      if (r2 < surelyBelow || r2 > surelyOver) continue;
      const radius = Math.hypot(u, v);
      if (!(radius >= lowRadius && radius <= highRadius)) continue;
    }
    keptX[kept] = xi;
    keptY[kept] = yi;
    kept++;
  }
  near[0] += nearBounds;
  return kept;
}

/** Options of `createTwoPassFit` (and of `createDetectorFit`): those of `createEllipseFit`, and where the sums are kept. */
export interface TwoPassFitOptions extends EllipseFitMethodOptions {
  /**
   * Makes the accumulators of the passes' sums (two); default `createEllipseAccumulator` with these options. Any
   * accumulator that keeps the same sums gives the same fit: src/accel's `createFastEllipseAccumulator` does,
   * faster.
   */
  readonly createAccumulator?: () => EllipseAccumulator;
}

/**
 * Half-width (in units of the radius) of the bands about the gate's bounds where a provisional gate's decisions
 * are not trusted: see `TwoPassFit.endPass`.
 */
const BAND = 0.02;

/** Options as `createEllipseFit` (method default 'hyper'), plus the accumulators. */
export function createTwoPassFit(options: TwoPassFitOptions = {}): TwoPassFit {
  const { createAccumulator, ...fitOptions } = options;
  const make = createAccumulator ?? (() => createEllipseAccumulator(fitOptions));
  const fit = createEllipseFit(fitOptions);
  const accumulator = make();
  accumulator.reset();
  // With a provisional gate, the second pass also sums every sample here: the first pass over all of them.
  const whole = make();
  whole.reset();
  const correction = createCorrection();
  const keptX = new Float64Array(CHUNK);
  const keptY = new Float64Array(CHUNK);
  const near = new Float64Array(1);
  let gate: EllipseCalibration | null = null;
  let provisional = false;

  function add(x: ArrayLike<number>, y: ArrayLike<number>, length: number): void {
    if (gate === null) {
      accumulator.add(x, y, length);
      return;
    }
    if (accumulator.addWithin !== undefined) {
      accumulator.addWithin(x, y, length, correction.coefficients, 1 - GATE, 1 + GATE, BAND, near, provisional ? whole : undefined);
      return;
    }
    if (provisional) whole.add(x, y, length);
    for (let start = 0; start < length; start += CHUNK) {
      const kept = keepWithin(x, y, start, Math.min(length, start + CHUNK), correction.coefficients, 1 - GATE, 1 + GATE, keptX, keptY, BAND, near);
      accumulator.add(keptX, keptY, kept);
    }
  }

  function setGate(next: EllipseCalibration | null, isProvisional: boolean): void {
    gate = next;
    provisional = isProvisional;
    correction.setCalibration(next);
    near[0] = 0;
  }

  function endPass(part = false): EllipseFitResult | null {
    if (gate !== null && provisional) {
      // The first pass over every sample, as it would have ended: its failure is the fit's.
      const first = fit.solve(whole);
      const shift = gateShift(correction.coefficients, first.ok ? first.calibration : null, whole.state);
      whole.reset();
      if (!first.ok) {
        accumulator.reset();
        setGate(null, false);
        return first;
      }
      if (near[0] === 0 && shift < BAND) {
        // Every sample is on the same side of each bound for both gates: the samples kept are the same.
        const result = fit.solve(accumulator);
        accumulator.reset();
        setGate(null, false);
        return result;
      }
      accumulator.reset();
      setGate(first.calibration, false);
      return null;
    }
    const first = gate === null;
    const result = fit.solve(accumulator);
    accumulator.reset();
    if (!first || !result.ok) {
      setGate(null, false);
      // A part's failure is not the fit's: the first pass is then made over every sample.
      return first && part && !result.ok ? null : result;
    }
    setGate(result.calibration, part);
    return null;
  }

  function reset(): void {
    accumulator.reset();
    whole.reset();
    setGate(null, false);
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
 * An upper bound of |r₁ − r₀| over every sample an accumulator's `state` holds (all lie within its grid, ±
 * gridHalfWidth about its shift): how far a pair's corrected radius can move between the gate of `coefficients`
 * and that of `calibration` (|Δ(u, v)| bounds the change of hypot(u, v)). Infinity without a calibration.
 */
function gateShift(coefficients: Float64Array, calibration: EllipseCalibration | null, state: AccumulatorState): number {
  if (calibration === null) return Infinity;
  const other = correctionCoefficients(calibration, new Float64Array(5));
  const ax = Math.abs(state.shiftX) + state.gridHalfWidth;
  const ay = Math.abs(state.shiftY) + state.gridHalfWidth;
  const du = Math.abs(other[0]! - coefficients[0]!) * ax + Math.abs(other[1]! - coefficients[1]!);
  const dv = Math.abs(other[2]! - coefficients[2]!) * ax + Math.abs(other[3]! - coefficients[3]!) * ay + Math.abs(other[4]! - coefficients[4]!);
  // Rounding of the two corrections (a few ulps of each term) is far below what this margin covers.
  return Math.hypot(du, dv) * (1 + 1e-6) + 1e-9;
}

/** Windows of `spreadWindows`: enough that a capture's every stretch of motion is visited. */
export const SPREAD_WINDOWS = 64;

/**
 * Where a pass over about `samples` of a capture of `totalSamples` reads, spread over all of it: SPREAD_WINDOWS
 * windows of ⌈samples / SPREAD_WINDOWS⌉ samples, the first at the start and the last at the end, as [start, count]
 * pairs in order. Null when the capture's length is unknown (null) or under 4 · samples: reading all of it then
 * costs little more. The first pass of the two-pass fit only finds the gate of the second, so `calibrate` and
 * `replay` read it from these windows of a long capture (see docs/fitting.md).
 */
export function spreadWindows(totalSamples: number | null, samples: number): Array<readonly [number, number]> | null {
  integerInRange('samples', samples, SPREAD_WINDOWS, Number.MAX_SAFE_INTEGER);
  if (totalSamples === null || totalSamples < 4 * samples) return null;
  const length = Math.ceil(samples / SPREAD_WINDOWS);
  return Array.from({ length: SPREAD_WINDOWS }, (_, k) => [Math.floor((k * (totalSamples - length)) / (SPREAD_WINDOWS - 1)), length] as const);
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
   * as soon as a pass fails). `part` as `TwoPassFit.endPass`'s, for pass 1 (ignored in pass 0).
   */
  endPass(part?: boolean): DetectorFitResult | null;
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

  function endPass(part = false): DetectorFitResult | null {
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
    const result = fit.endPass(part);
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
