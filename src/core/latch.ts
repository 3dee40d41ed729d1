// Position at an edge of a digital input (a camera trigger, a touch probe, a controller's sync pulse): linear
// interpolation between the samples on either side of the edge's sub-sample time, with a bound of its error.

import { numberInRange } from './options.js';

export interface EdgeLatchOptions {
  /**
   * Resolution of the edge times in sample periods: the timing error the device may make. Default 2^-16 (the
   * wire format's lead unit, docs/wire-format.md); range (0, 1].
   */
  readonly timeResolutionSamples?: number;
}

/** One edge with the position there. */
export interface EdgePosition {
  /** Time of the edge as a fractional absolute sample index (same count as the pipeline's `nextSampleIndex`). */
  readonly sampleTime: number;
  /** Input line, as sent: 0 trigger, 1 reference mark, 2..7 further trigger inputs. */
  readonly line: number;
  readonly rising: boolean;
  /** Position at the edge, m. NaN when no sample near the edge was processed (an edge inside a gap). */
  readonly positionM: number;
  /** Velocity at the edge, m/s: the pipeline's, interpolated like the position. */
  readonly velocityMS: number;
  /**
   * Bound of the error the interpolation adds, m (the samples' own position error comes on top):
   * interpolated, f(1−f)/2 · 1.25 · (max(|Δ²p| at the two samples) + |their difference|) + |Δp| · δ, with f the
   * edge's fraction of the sample interval, Δp the step across it and δ the time resolution; extrapolated
   * from one side (the sample before the edge is missing), (1 − f) · |v| · T, the whole correction.
   */
  readonly uncertaintyM: number;
  /** Alarm bits (`AlarmBit`) of the samples on either side of the edge, OR-ed. */
  readonly flags: number;
}

export interface EdgeLatch {
  /**
   * Announces an edge at absolute sample time `sampleTime` (a fractional sample index). Give it before or with
   * the block holding the first sample at or after it; its position is pushed by the `process` call that
   * passes the sample after that one (or by `flush`).
   */
  addEdge(sampleTime: number, line: number, rising: boolean): void;
  /**
   * Takes one processed block (outputs of the pipeline, first absolute index `firstIndex`) and pushes onto
   * `out` every edge whose samples are now known, in time order. Returns how many it pushed. Blocks come in
   * index order; indices skipped between blocks are samples lost in a gap.
   */
  process(positionM: Float64Array, velocityMS: Float64Array, flags: Uint8Array, length: number, firstIndex: number, out: EdgePosition[]): number;
  /** Pushes the edges still waiting for a later sample (end of the stream), from what is known. */
  flush(out: EdgePosition[]): number;
  /** Edges announced and not yet pushed. */
  readonly pending: number;
  reset(): void;
}

/** Margin on the second differences: they underestimate the largest acceleration inside the interval (see docs/live.md). */
const CURVATURE_MARGIN = 1.25;
/** Samples kept from earlier blocks: the edge at k needs k − 2 .. k + 1. */
const HISTORY = 3;

export function createEdgeLatch(options: EdgeLatchOptions = {}): EdgeLatch {
  const resolution = numberInRange('timeResolutionSamples', options.timeResolutionSamples ?? 2 ** -16, 0, 1, true);
  // Pending edges, sorted by time (edges are rare: plain arrays, allocation only when one arrives).
  const times: number[] = [];
  const lines: number[] = [];
  const risings: boolean[] = [];
  // The last samples of earlier blocks, oldest first.
  const historyIndex = new Float64Array(HISTORY).fill(-1);
  const historyPosition = new Float64Array(HISTORY);
  const historyVelocity = new Float64Array(HISTORY);
  const historyFlags = new Uint8Array(HISTORY);
  // The block being processed.
  let blockPosition: Float64Array = new Float64Array(0);
  let blockVelocity: Float64Array = new Float64Array(0);
  let blockFlags: Uint8Array = new Uint8Array(0);
  let blockFirst = 0;
  let blockLength = 0;

  /** Where absolute sample `index` is: ≥ 0 in the block, −1 − h in the history, or NaN when unknown. */
  function locate(index: number): number {
    if (index >= blockFirst && index < blockFirst + blockLength) return index - blockFirst;
    for (let h = 0; h < HISTORY; h++) if (historyIndex[h] === index) return -1 - h;
    return Number.NaN;
  }
  const positionAt = (at: number) => (at >= 0 ? blockPosition[at]! : historyPosition[-1 - at]!);
  const velocityAt = (at: number) => (at >= 0 ? blockVelocity[at]! : historyVelocity[-1 - at]!);
  const flagsAt = (at: number) => (at >= 0 ? blockFlags[at]! : historyFlags[-1 - at]!);

  /** Second difference centred on sample `index`, or NaN when a neighbour is unknown. */
  function secondDifference(index: number): number {
    const before = locate(index - 1);
    const centre = locate(index);
    const after = locate(index + 1);
    if (before !== before || centre !== centre || after !== after) return Number.NaN;
    return positionAt(after) - 2 * positionAt(centre) + positionAt(before);
  }

  function latch(e: number): EdgePosition {
    const sampleTime = times[e]!;
    const line = lines[e]!;
    const rising = risings[e]!;
    const k = Math.ceil(sampleTime);
    const fraction = sampleTime - (k - 1); // of the interval (k − 1, k], in (0, 1]
    const before = locate(k - 1);
    const after = locate(k);
    if (after !== after) {
      // The first sample at or after the edge was never processed (lost, or not reached): nothing to say.
      return { sampleTime, line, rising, positionM: NaN, velocityMS: NaN, uncertaintyM: NaN, flags: 0 };
    }
    if (before !== before) {
      // The edge follows a gap or the first sample: step back from the sample after it along the next step.
      const next = locate(k + 1);
      const step = next === next ? positionAt(next) - positionAt(after) : NaN;
      const back = (1 - fraction) * step;
      return {
        sampleTime,
        line,
        rising,
        positionM: fraction === 1 ? positionAt(after) : positionAt(after) - back,
        velocityMS: velocityAt(after),
        uncertaintyM: fraction === 1 ? 0 : Math.abs(back),
        flags: flagsAt(after),
      };
    }
    const p0 = positionAt(before);
    const step = positionAt(after) - p0;
    const curvatureBefore = secondDifference(k - 1);
    const curvatureAfter = secondDifference(k);
    const knownBefore = curvatureBefore === curvatureBefore;
    const knownAfter = curvatureAfter === curvatureAfter;
    // The second differences bracket the acceleration over the interval; their difference covers its change
    // (the jerk). Next to a gap only one is known, and twice it stands in for the change.
    const curvature =
      knownBefore && knownAfter
        ? Math.max(Math.abs(curvatureBefore), Math.abs(curvatureAfter)) + Math.abs(curvatureAfter - curvatureBefore)
        : knownBefore || knownAfter
          ? 2 * Math.abs(knownBefore ? curvatureBefore : curvatureAfter)
          : Math.abs(step);
    return {
      sampleTime,
      line,
      rising,
      positionM: p0 + fraction * step,
      velocityMS: velocityAt(before) + fraction * (velocityAt(after) - velocityAt(before)),
      uncertaintyM: ((fraction * (1 - fraction)) / 2) * CURVATURE_MARGIN * curvature + Math.abs(step) * resolution,
      flags: flagsAt(before) | flagsAt(after),
    };
  }

  /** Pushes the first `count` pending edges and forgets them. */
  function emit(count: number, out: EdgePosition[]): number {
    for (let e = 0; e < count; e++) out.push(latch(e));
    times.splice(0, count);
    lines.splice(0, count);
    risings.splice(0, count);
    return count;
  }

  function addEdge(sampleTime: number, line: number, rising: boolean): void {
    if (!Number.isFinite(sampleTime) || sampleTime <= -1) {
      throw new RangeError(`sampleTime must be a finite number above -1 (got ${sampleTime})`);
    }
    let at = times.length;
    while (at > 0 && times[at - 1]! > sampleTime) at--;
    times.splice(at, 0, sampleTime);
    lines.splice(at, 0, line);
    risings.splice(at, 0, rising);
  }

  function process(positionM: Float64Array, velocityMS: Float64Array, flags: Uint8Array, length: number, firstIndex: number, out: EdgePosition[]): number {
    if (length <= 0) return 0;
    blockPosition = positionM;
    blockVelocity = velocityMS;
    blockFlags = flags;
    blockFirst = firstIndex;
    blockLength = length;
    const end = firstIndex + length;
    // An edge is complete once the sample after its first following sample has passed: k + 1 < end.
    let ready = 0;
    while (ready < times.length && Math.ceil(times[ready]!) + 1 < end) ready++;
    const pushed = ready > 0 ? emit(ready, out) : 0;
    // Keep the block's last samples (with older ones when the block is short) for the edges still to come.
    for (let i = Math.max(0, length - HISTORY); i < length; i++) {
      historyIndex.copyWithin(0, 1);
      historyPosition.copyWithin(0, 1);
      historyVelocity.copyWithin(0, 1);
      historyFlags.copyWithin(0, 1);
      historyIndex[HISTORY - 1] = firstIndex + i;
      historyPosition[HISTORY - 1] = positionM[i]!;
      historyVelocity[HISTORY - 1] = velocityMS[i]!;
      historyFlags[HISTORY - 1] = flags[i]!;
    }
    blockLength = 0;
    return pushed;
  }

  function reset(): void {
    times.length = 0;
    lines.length = 0;
    risings.length = 0;
    historyIndex.fill(-1);
    blockLength = 0;
  }

  reset();
  return {
    addEdge,
    process,
    flush: (out) => emit(times.length, out),
    get pending() {
      return times.length;
    },
    reset,
  };
}
