// Positioning accuracy and repeatability of one axis from a bidirectional target run, with the quantities of
// ISO 230-2:2014 ("Test code for machine tools — Part 2: Determination of accuracy and repeatability of positioning
// of numerically controlled axes"). The clause numbers below are recalled, not checked against the text: clause 3
// (terms and definitions: positional deviation 3.5, mean unidirectional and bidirectional positional deviation at a
// position 3.9–3.10, reversal value 3.11–3.13, standard uncertainty and repeatability 3.14–3.18, systematic
// positional deviation 3.19–3.20, range of the mean bidirectional deviation 3.21, accuracy 3.22–3.23) and clause 4
// (test conditions, the standard test cycle). Our own words and layout throughout.

import { finiteNumber, integerInRange, OptionError, positiveFinite } from './options.js';

export interface StopDetectorOptions {
  /** Sample rate of the positions, Hz; positive finite. */
  readonly rateHz: number;
  /**
   * Half-width of the band a stop stays in, m: every sample of a stop lies within max − min ≤ 2 · bandHalfWidthM.
   * Positive finite; pick it above the dwell's vibration and below the smallest target spacing.
   */
  readonly bandHalfWidthM: number;
  /** Shortest stop, s; positive finite. Shorter pauses (a reversal, a hesitation) are not stops. */
  readonly minDwellS: number;
}

/** One stop of the axis: a stretch of at least minDwellS whose samples stay in a band 2 · bandHalfWidthM wide. */
export interface Stop {
  /** Absolute sample indices of the first and last sample of the stop. */
  readonly firstIndex: number;
  readonly lastIndex: number;
  /** Mean position over the stop, m. */
  readonly meanM: number;
  /**
   * Direction the axis came from: +1 from below (moving in the positive direction), −1 from above, 0 when the
   * record starts inside the stop (no approach seen).
   */
  readonly approach: -1 | 0 | 1;
}

export interface StopDetector {
  /** Takes consecutive positions (m); pushes each stop onto `stops` once it has ended. Non-finite samples end a stop. */
  process(positionM: ArrayLike<number>, length: number, stops: Stop[]): void;
  /** Ends the record: a stop still running at the end is pushed if long enough. */
  finish(stops: Stop[]): void;
  reset(): void;
}

/**
 * Dwell detection. Criteria (stated to the user): a stop is a maximal run of consecutive finite samples whose range
 * (max − min) stays within 2 · bandHalfWidthM and which lasts at least minDwellS; its reading is the mean of the run,
 * and its approach direction is the side of the last sample before the run.
 */
export function createStopDetector(options: StopDetectorOptions): StopDetector {
  const rateHz = positiveFinite('rateHz', options.rateHz);
  const band = 2 * positiveFinite('bandHalfWidthM', options.bandHalfWidthM);
  const minSamples = Math.max(2, Math.ceil(positiveFinite('minDwellS', options.minDwellS) * rateHz));
  let index = 0;
  let runStart = 0;
  let runCount = 0;
  let runMin = Infinity;
  let runMax = -Infinity;
  let runSum = 0;
  let runOrigin = 0;
  let before = Number.NaN; // the last sample before the run, NaN when none
  let previous = Number.NaN;

  function close(stops: Stop[]): void {
    if (runCount >= minSamples) {
      const meanM = runOrigin + runSum / runCount;
      stops.push({
        firstIndex: runStart,
        lastIndex: runStart + runCount - 1,
        meanM,
        approach: Number.isNaN(before) ? 0 : before < meanM ? 1 : -1,
      });
    }
  }

  return {
    process(positionM, length, stops) {
      for (let i = 0; i < length; i++, index++) {
        const x = positionM[i]!;
        if (!Number.isFinite(x)) {
          close(stops);
          runCount = 0;
          before = Number.NaN;
          previous = Number.NaN;
          continue;
        }
        const low = x < runMin ? x : runMin;
        const high = x > runMax ? x : runMax;
        if (runCount > 0 && high - low <= band) {
          runMin = low;
          runMax = high;
          runSum += x - runOrigin;
          runCount++;
        } else {
          if (runCount > 0) {
            close(stops);
            before = previous;
          }
          runStart = index;
          runCount = 1;
          runMin = x;
          runMax = x;
          runOrigin = x;
          runSum = 0;
        }
        previous = x;
      }
    },
    finish(stops) {
      close(stops);
      runCount = 0;
    },
    reset() {
      index = 0;
      runCount = 0;
      runMin = Infinity;
      runMax = -Infinity;
      before = Number.NaN;
      previous = Number.NaN;
    },
  };
}

/** A stop the run expected and did not find, or found out of order: the message names target, direction and cycle. */
export class PositioningRunError extends Error {
  override readonly name = 'PositioningRunError';
}

export interface TargetRunOptions {
  /** Target positions in increasing order, m (at least 2, distinct). */
  readonly targetsM: ArrayLike<number>;
  /** Measurement cycles: each approaches every target in the positive direction, then every target in the negative one. */
  readonly cycles: number;
  /**
   * A stop belongs to a target when its reading lies within this distance of it, m. Default a quarter of the smallest
   * spacing, at most 0.5 mm, so that an overrun stop a few millimetres beyond the end target is not taken for it.
   */
  readonly matchToleranceM?: number;
  /** Added to every stop reading to put it into the targets' coordinates, m. Default: the first assigned stop reads the first target. */
  readonly datumOffsetM?: number;
}

export interface TargetRun {
  /** Positional deviations x_ij = P_ij − P_i, m: up[i][j] for target i, cycle j, approached in the positive direction. */
  readonly up: readonly Float64Array[];
  readonly down: readonly Float64Array[];
  /** The stops used, in order, with the target index, direction and cycle they were assigned to. */
  readonly assigned: ReadonlyArray<{ readonly stop: Stop; readonly target: number; readonly direction: 1 | -1; readonly cycle: number }>;
  /** Stops left out: the record starting inside a stop, and stops near no target (overrun positions). */
  readonly ignored: readonly Stop[];
  readonly datumOffsetM: number;
}

const arrow = (direction: 1 | -1) => (direction === 1 ? '↑ (positive direction)' : '↓ (negative direction)');

/**
 * Assigns the detected stops to the standard bidirectional cycle: for each cycle, targets 1..m approached in the
 * positive direction, then m..1 in the negative direction (ISO 230-2:2014 clause 4, recalled). Stops near no target
 * (overruns before a reversal) and a stop at the very start of the record are ignored; a stop near a target other
 * than the expected one, or with the wrong approach, or too few stops, throw a PositioningRunError naming the
 * missing stop.
 */
export function assignTargetRun(stops: readonly Stop[], rateHz: number, options: TargetRunOptions): TargetRun {
  positiveFinite('rateHz', rateHz);
  const targets = Array.from(options.targetsM, (t, k) => finiteNumber(`targetsM[${k}]`, t));
  if (targets.length < 2) throw new OptionError('targetsM', 'at least 2 target positions', targets.length);
  let spacing = Infinity;
  for (let k = 1; k < targets.length; k++) {
    if (!(targets[k]! > targets[k - 1]!)) throw new OptionError('targetsM', 'in increasing order, without repeats', options.targetsM);
    spacing = Math.min(spacing, targets[k]! - targets[k - 1]!);
  }
  const cycles = integerInRange('cycles', options.cycles, 1, 10_000);
  const tolerance = positiveFinite('matchToleranceM', options.matchToleranceM ?? Math.min(spacing / 4, 5e-4));
  const m = targets.length;
  const sequence: Array<{ target: number; direction: 1 | -1; cycle: number }> = [];
  for (let j = 0; j < cycles; j++) {
    for (let i = 0; i < m; i++) sequence.push({ target: i, direction: 1, cycle: j });
    for (let i = m - 1; i >= 0; i--) sequence.push({ target: i, direction: -1, cycle: j });
  }
  const up = targets.map(() => new Float64Array(cycles));
  const down = targets.map(() => new Float64Array(cycles));
  const assigned: Array<TargetRun['assigned'][number]> = [];
  const ignored: Stop[] = [];
  let offset = options.datumOffsetM === undefined ? null : finiteNumber('datumOffsetM', options.datumOffsetM);
  const describe = (expected: (typeof sequence)[number]) =>
    `target ${expected.target + 1} (${(targets[expected.target]! * 1e3).toPrecision(7)} mm) ${arrow(expected.direction)} of cycle ${expected.cycle + 1}`;
  const at = (stop: Stop) => `stop at ${(stop.firstIndex / rateHz).toFixed(3)}–${(stop.lastIndex / rateHz).toFixed(3)} s`;
  let next = 0;
  for (const stop of stops) {
    if (next === sequence.length) {
      ignored.push(stop);
      continue;
    }
    const expected = sequence[next]!;
    if (stop.approach === 0) {
      ignored.push(stop);
      continue;
    }
    if (offset === null) offset = targets[expected.target]! - stop.meanM;
    const reading = stop.meanM + offset;
    const nearest = targets.reduce((best, t, k) => (Math.abs(t - reading) < Math.abs(targets[best]! - reading) ? k : best), 0);
    if (Math.abs(targets[nearest]! - reading) > tolerance) {
      ignored.push(stop);
      continue;
    }
    if (nearest !== expected.target) {
      throw new PositioningRunError(
        `missing stop: expected ${describe(expected)}, but the next ${at(stop)} reads ${(reading * 1e3).toPrecision(7)} mm, at target ${nearest + 1}`,
      );
    }
    if (stop.approach !== expected.direction) {
      throw new PositioningRunError(`missing stop: expected ${describe(expected)}, but the ${at(stop)} at that target was approached ${arrow(stop.approach)}`);
    }
    (expected.direction === 1 ? up : down)[expected.target]![expected.cycle] = reading - targets[expected.target]!;
    assigned.push({ stop, target: expected.target, direction: expected.direction, cycle: expected.cycle });
    next++;
  }
  if (next < sequence.length) {
    throw new PositioningRunError(`missing stop: expected ${describe(sequence[next]!)}, but the record ends after ${next} of ${sequence.length} stops`);
  }
  return { up, down, assigned, ignored, datumOffsetM: offset ?? 0 };
}

export interface TargetStatistics {
  readonly targetM: number;
  /** Mean unidirectional positional deviations x̄↑, x̄↓ and their mean x̄ (bidirectional), m. */
  readonly meanUpM: number;
  readonly meanDownM: number;
  readonly meanM: number;
  /** Reversal value B = x̄↑ − x̄↓, m. */
  readonly reversalM: number;
  /** Estimators of the unidirectional standard uncertainty s↑, s↓ (n − 1 in the denominator), m. */
  readonly sUpM: number;
  readonly sDownM: number;
  /** Unidirectional repeatabilities 4s↑, 4s↓ and the bidirectional max(2s↑ + 2s↓ + |B|, R↑, R↓), m. */
  readonly repeatabilityUpM: number;
  readonly repeatabilityDownM: number;
  readonly repeatabilityM: number;
}

export interface AxisStatistics {
  readonly targets: readonly TargetStatistics[];
  /** Reversal value of the axis max |B_i| and mean reversal value (1/m) Σ B_i, m. */
  readonly reversalM: number;
  readonly meanReversalM: number;
  /** Repeatability of the axis: max R↑_i, max R↓_i, max R_i, m. */
  readonly repeatabilityUpM: number;
  readonly repeatabilityDownM: number;
  readonly repeatabilityM: number;
  /** Systematic positional deviation: range of x̄↑_i, of x̄↓_i, and of both together, m. */
  readonly systematicUpM: number;
  readonly systematicDownM: number;
  readonly systematicM: number;
  /** Range of the mean bidirectional positional deviation x̄_i, m. */
  readonly meanDeviationRangeM: number;
  /** Accuracy: range of x̄ ± 2s over the targets, per direction and for both together, m. */
  readonly accuracyUpM: number;
  readonly accuracyDownM: number;
  readonly accuracyM: number;
}

function meanOf(values: Float64Array): number {
  let sum = 0;
  for (const v of values) sum += v;
  return sum / values.length;
}

function sampleSd(values: Float64Array, mean: number): number {
  if (values.length < 2) return Number.NaN;
  let squares = 0;
  for (const v of values) squares += (v - mean) * (v - mean);
  return Math.sqrt(squares / (values.length - 1));
}

/** The ISO 230-2 quantities from the deviations of a bidirectional run (see the clause list at the top of this file). */
export function positioningStatistics(targetsM: ArrayLike<number>, up: readonly Float64Array[], down: readonly Float64Array[]): AxisStatistics {
  const m = targetsM.length;
  if (up.length !== m || down.length !== m) throw new OptionError('up/down', `one array of deviations per target (${m})`, [up.length, down.length]);
  const targets: TargetStatistics[] = [];
  for (let i = 0; i < m; i++) {
    if (up[i]!.length < 2 || down[i]!.length < 2) throw new OptionError(`deviations of target ${i + 1}`, 'at least 2 cycles per direction', Math.min(up[i]!.length, down[i]!.length));
    const meanUpM = meanOf(up[i]!);
    const meanDownM = meanOf(down[i]!);
    const sUpM = sampleSd(up[i]!, meanUpM);
    const sDownM = sampleSd(down[i]!, meanDownM);
    const reversalM = meanUpM - meanDownM;
    const repeatabilityUpM = 4 * sUpM;
    const repeatabilityDownM = 4 * sDownM;
    targets.push({
      targetM: targetsM[i]!,
      meanUpM,
      meanDownM,
      meanM: (meanUpM + meanDownM) / 2,
      reversalM,
      sUpM,
      sDownM,
      repeatabilityUpM,
      repeatabilityDownM,
      repeatabilityM: Math.max(2 * sUpM + 2 * sDownM + Math.abs(reversalM), repeatabilityUpM, repeatabilityDownM),
    });
  }
  const max = (f: (t: TargetStatistics) => number) => Math.max(...targets.map(f));
  const min = (f: (t: TargetStatistics) => number) => Math.min(...targets.map(f));
  return {
    targets,
    reversalM: max((t) => Math.abs(t.reversalM)),
    meanReversalM: targets.reduce((sum, t) => sum + t.reversalM, 0) / m,
    repeatabilityUpM: max((t) => t.repeatabilityUpM),
    repeatabilityDownM: max((t) => t.repeatabilityDownM),
    repeatabilityM: max((t) => t.repeatabilityM),
    systematicUpM: max((t) => t.meanUpM) - min((t) => t.meanUpM),
    systematicDownM: max((t) => t.meanDownM) - min((t) => t.meanDownM),
    systematicM: max((t) => Math.max(t.meanUpM, t.meanDownM)) - min((t) => Math.min(t.meanUpM, t.meanDownM)),
    meanDeviationRangeM: max((t) => t.meanM) - min((t) => t.meanM),
    accuracyUpM: max((t) => t.meanUpM + 2 * t.sUpM) - min((t) => t.meanUpM - 2 * t.sUpM),
    accuracyDownM: max((t) => t.meanDownM + 2 * t.sDownM) - min((t) => t.meanDownM - 2 * t.sDownM),
    accuracyM: max((t) => Math.max(t.meanUpM + 2 * t.sUpM, t.meanDownM + 2 * t.sDownM)) - min((t) => Math.min(t.meanUpM - 2 * t.sUpM, t.meanDownM - 2 * t.sDownM)),
  };
}
