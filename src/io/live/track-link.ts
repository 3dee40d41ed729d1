// Bytes to positions in one call: a byte source (serial port or any other) → link reader (decoder, gap rules) →
// one pipeline per axis → per-subscriber position, velocity, alarms and status. Every sink of a live session
// (rows, status, recorder, network feeds) subscribes to the one shared chain, so all see the same count.

import { Observable, filter, map, share, type OperatorFunction, type Subscription } from 'rxjs';
import { createDetectorFit, integerInRange, OptionError, positiveFinite, type ChannelParameters, type DetectorFitResult, type EllipseCalibration, type EllipseFitResult } from '../../core/index.js';
import {
  createAxesRunner,
  createAxesView,
  createRelay,
  type Axes,
  type AxesRunner,
  type AxesRunnerOptions,
  type AxesViewOptions,
  type AxisBlockSummary,
  type AxisOptions,
} from '../../stream/index.js';
import type { ByteSource, ByteSourceEvent, LinkEvent } from '../serial/index.js';
import { WireEdgeLine } from '../wire/index.js';
import { createLinkReader, type LinkBlock, type LinkDuplicate, type LinkGap, type LinkReaderOptions, type LinkReaderStatus } from './link-reader.js';

/** The link reader's settings (without its callbacks). */
export type LinkOptions = Omit<LinkReaderOptions, 'onBlock' | 'onGap' | 'onLink' | 'onDuplicate'>;

/** What a link reader hands on, in order: blocks of samples, gaps before them, repeated frames dropped, link changes. */
export type LinkReading = LinkBlock | LinkGap | LinkDuplicate | LinkEvent;

/**
 * Byte source events → link readings, with a fresh reader per subscription (so each counts from its first
 * sample). Blocks are reused objects: read them inside `next`. A contradiction in the frames (see
 * `LinkReader.push`) ends the stream with its error.
 */
export function readLink(options: LinkOptions = {}): OperatorFunction<ByteSourceEvent, LinkReading> {
  // Validated once, here, not at the first subscription.
  createLinkReader({ ...options, onBlock: () => undefined });
  return (events$) =>
    new Observable<LinkReading>((subscriber) => {
      const reader = createLinkReader({
        ...options,
        onBlock: (block) => subscriber.next(block),
        onGap: (gap) => subscriber.next(gap),
        onDuplicate: (duplicate) => subscriber.next(duplicate),
        onLink: (event) => subscriber.next(event),
      });
      return events$.subscribe({
        next(event) {
          try {
            reader.push(event);
          } catch (error) {
            subscriber.error(error);
          }
        },
        error: (error: unknown) => subscriber.error(error),
        complete: () => subscriber.complete(),
      });
    });
}

/**
 * One axis of a live link: the pipeline options without the rate (it comes from the frames or `link.rateHz`).
 * `calibration: 'fit'` fits the correction live to the first samples (see `TrackLinkOptions.fitSamples`): of a pair,
 * or of every output when the frames carry 3 or 4 for the axis (the axis is then calibrated by their parameters).
 */
export type LiveAxisOptions = Omit<AxisOptions, 'rateHz' | 'calibration'> & { readonly calibration?: EllipseCalibration | null | 'fit' };

export interface TrackLinkOptions extends Omit<AxesRunnerOptions, 'axes'>, AxesViewOptions {
  /** Axis k reads channels 2k (x) and 2k + 1 (y) unless its `channelPair` says otherwise; 1..8 axes. */
  readonly axes: readonly LiveAxisOptions[];
  /** How the bytes are read: frames or text lines, frame size limit, sample rate when the frames carry none. */
  readonly link?: LinkOptions;
  /**
   * Re-reference every axis at each rising edge of the reference-mark input (edge line 1 of version 2 frames):
   * the position at the mark reads zero. Default true; false leaves the marks to `latchEdges` only.
   */
  readonly referenceMarks?: boolean;
  /**
   * Samples held back for a live fit; integer 64..2^24, default 16384. No position is made until every axis
   * with `calibration: 'fit'` has its fit (as calibrate's: two passes, the second gated on the first, after a pass
   * for the source power with 3 or 4 outputs); then the held samples go through the
   * pipelines first, so none is lost. A failed fit is retried every as many further samples.
   */
  readonly fitSamples?: number;
  /**
   * Air that changes during the run: the refractive index for a sample time (s from the first sample, lost
   * samples counted), set on every axis before each block from the time of its middle sample (e.g. from
   * `airIndexAt` over a followed environment log). The index rescales the reading, never the count. Default: the
   * axes' own `refractiveIndex` (and `setRefractiveIndex`).
   */
  readonly refractiveIndexAt?: (tS: number) => number;
  /** Fit attempts before the stream ends with an error; integer 1..64, default 8. */
  readonly fitAttempts?: number;
  /**
   * The stream completes after this many seconds of samples received: once round(durationS × rate) samples
   * (at least 1) have arrived, cut inside a block if need be. Lost samples do not count: a gap, a resync of
   * unknown length or a repeated frame neither shortens nor lengthens the run. Positive; default: never.
   */
  readonly durationS?: number;
}

/**
 * Every axis' position block for one block of samples, with the block of samples it was made from (its edges
 * included; `block` and `summaries` are reused: read inside `next`).
 */
export interface LivePositions {
  readonly kind: 'positions';
  readonly rateHz: number;
  readonly block: LinkBlock;
  readonly summaries: readonly AxisBlockSummary[];
}

/** A live fit attempt of one axis. */
export interface LiveFit {
  readonly kind: 'fit';
  readonly axis: string;
  /** For 3 or 4 detector outputs the ellipse of the power-normalised pair, and every output's parameters (`channels`). */
  readonly result: DetectorFitResult;
  readonly heldSamples: number;
  /** True on success, and on the failure after which no further attempt is made. */
  readonly final: boolean;
}

/**
 * In order: every block of samples as decoded (before any fit hold), every position block, the gaps, repeated
 * frames dropped, link changes, fit attempts and re-references on demand.
 */
export type LiveReading = LinkBlock | LivePositions | LinkGap | LinkDuplicate | LinkEvent | LiveFit | LiveReference;

export interface LiveAxes extends Axes {
  /** Everything in order (see `LiveReading`). Shared with the axes. */
  readonly readings$: Observable<LiveReading>;
  /** Link changes (up, down and why). */
  readonly link$: Observable<LinkEvent>;
  /** Gaps: samples lost in transport, with their absolute index and cause. */
  readonly gaps$: Observable<LinkGap>;
  /** The running reader's counters (link, samples, gaps, decoder); null before the first subscription. */
  readonly linkStatus: Readonly<LinkReaderStatus> | null;
  /**
   * Zero (or preset to `presetM`, m) one axis (index or name) or every axis at the next sample, and clear its
   * count-lost latch there: for a terminal key, a signal or an authenticated command. Returns what was done, also
   * handed out on `readings$` before the positions it shapes; null while no position is made yet (no sample, or
   * the live fit still holding the first samples: the first sample is the reference anyway). Throws an
   * OptionError for an unknown axis or a non-finite preset.
   */
  reReference(options?: { readonly axis?: number | string; readonly presetM?: number; readonly origin?: string }): LiveReference | null;
}

/** A re-reference on demand: the axes that read `presetM` at absolute sample `sampleIndex`, and who asked. */
export interface LiveReference {
  readonly kind: 'reference';
  readonly axes: readonly string[];
  readonly sampleIndex: number;
  readonly presetM: number;
  /** As given to `reReference` (e.g. `key z`, `SIGUSR1`, `WebSocket 127.0.0.1`); empty when none. */
  readonly origin: string;
}

/** A rate used only to check the axis options before the frames tell the true one; no rate rule binds at it. */
const PROBE_RATE_HZ = 1e12;

/** The live fit's defaults: samples held back for it, and attempts before the stream ends with an error. */
export const LIVE_FIT_DEFAULTS = Object.freeze({ fitSamples: 16_384, fitAttempts: 8 });
/** Samples per block when the held samples go through the pipelines after a live fit. */
const REPLAY_BLOCK = 16_384;

/** Interleaved samples held back during a live fit, in segments that keep their gaps and channel counts. */
function createHoldStore() {
  let values = new Int16Array(0);
  let used = 0;
  const segments: {
    start: number;
    samples: number;
    channelCount: number;
    axisOutputs: readonly number[];
    gapBefore: number;
    sampleIndex: number;
    rateHz: number;
    edgeTime: Float64Array;
    edgeLine: Uint8Array;
    edgeRising: Uint8Array;
  }[] = [];
  return {
    get samples() {
      return segments.reduce((sum, segment) => sum + segment.samples, 0);
    },
    segments,
    get values() {
      return values;
    },
    add(block: LinkBlock): void {
      const length = block.samplesPerFrame * block.channelCount;
      if (used + length > values.length) {
        const grown = new Int16Array(Math.max(2 * values.length, used + length, 65_536));
        grown.set(values.subarray(0, used));
        values = grown;
      }
      values.set(block.samples.subarray(0, length), used);
      segments.push({
        start: used,
        samples: block.samplesPerFrame,
        channelCount: block.channelCount,
        axisOutputs: block.axisOutputs,
        gapBefore: block.gapBefore,
        sampleIndex: block.sampleIndex,
        rateHz: block.rateHz,
        edgeTime: block.edgeTime.slice(0, block.edgeCount),
        edgeLine: block.edgeLine.slice(0, block.edgeCount),
        edgeRising: block.edgeRising.slice(0, block.edgeCount),
      });
      used += length;
    },
    clear(): void {
      values = new Int16Array(0);
      used = 0;
      segments.length = 0;
    },
  };
}

/**
 * Tracks the axes of a byte source. Options are checked here (the rate's own rules again at the first
 * samples when the frames give it); the source opens with the first subscriber (or `connect()`) and closes
 * after the last leaves. The stream ends with an error when the source gives up, the frames contradict the
 * options or a live fit fails for good.
 */
export function trackLink(source: ByteSource, options: TrackLinkOptions): LiveAxes {
  const link = options.link ?? {};
  const fitSamples = integerInRange('fitSamples', options.fitSamples ?? LIVE_FIT_DEFAULTS.fitSamples, 64, 2 ** 24);
  const fitAttempts = integerInRange('fitAttempts', options.fitAttempts ?? LIVE_FIT_DEFAULTS.fitAttempts, 1, 64);
  const durationS = options.durationS === undefined ? undefined : positiveFinite('durationS', options.durationS);
  const { refractiveIndexAt } = options;
  if (refractiveIndexAt !== undefined && typeof refractiveIndexAt !== 'function') throw new OptionError('refractiveIndexAt', 'a function of the sample time', typeof refractiveIndexAt);
  const fitted = options.axes.map((axis) => axis.calibration === 'fit');
  options.axes.forEach((axis, k) => {
    if (fitted[k] && axis.channels !== undefined) {
      throw new OptionError(`axes[${k}].calibration`, 'null when channels are given (the live fit finds the outputs\' parameters itself)', 'fit');
    }
  });
  const runnerOptions = (
    rateHz: number,
    calibrations: readonly (EllipseCalibration | null | undefined)[],
    fitResiduals: readonly number[] = [],
    fittedChannels: readonly (readonly ChannelParameters[] | undefined)[] = [],
  ): AxesRunnerOptions => ({
    axes: options.axes.map((axis, k) => ({
      ...axis,
      rateHz,
      calibration: calibrations[k],
      // A live fit of 3 or 4 outputs calibrates the axis by their parameters, as a calibration file of them does.
      ...(fittedChannels[k] === undefined ? {} : { channels: fittedChannels[k] }),
      // A live fit's residual sets the model watch's default scatter bound, as a calibration file's does.
      ...(axis.modelWatch === undefined || fitResiduals[k] === undefined ? {} : { modelWatch: { fitResidualRms: fitResiduals[k], ...axis.modelWatch } }),
    })),
    ...(options.tracePoints === undefined ? {} : { tracePoints: options.tracePoints }),
    ...(options.tracePointsPerBlock === undefined ? {} : { tracePointsPerBlock: options.tracePointsPerBlock }),
  });
  const given = options.axes.map((axis) => (axis.calibration === 'fit' ? null : axis.calibration));
  const probe = createAxesRunner(runnerOptions(link.rateHz ?? PROBE_RATE_HZ, given));
  readLink(link);
  let running: AxesRunner | null = null;
  let refractiveIndex: number | null = null;
  let linkStatus: Readonly<LinkReaderStatus> | null = null;
  // The running chain's output, for the re-references requested from outside it.
  let emit: ((reading: LiveReading) => void) | null = null;

  // Shared through a relay (see the end), not rxjs's Subject: it hands each reading on without allocating.
  const readings$ = new Observable<LiveReading>((subscriber) => {
    let runner: AxesRunner | null = null;
    let rateHz = Number.NaN;
    const calibrations = [...given];
    const fitResiduals: number[] = [];
    const fittedChannels: (readonly ChannelParameters[] | undefined)[] = [];
    const holding = fitted.includes(true);
    const held = createHoldStore();
    let nextFitAt = fitSamples;
    let attempts = 0;
    let ended = false;
    // Samples received so far (a field: past 2^31 samples a double, which in a closure's variable cost a heap number
    // a block), and how many the duration allows.
    const count = { received: 0 };
    let stopAfter = Number.POSITIVE_INFINITY;
    const positions: { kind: 'positions'; rateHz: number; block: LinkBlock; summaries: readonly AxisBlockSummary[] } = {
      kind: 'positions',
      rateHz: Number.NaN,
      block: null!,
      summaries: [],
    };

    function run(block: LinkBlock): void {
      if (runner === null) {
        runner = createAxesRunner(runnerOptions(rateHz, calibrations, fitResiduals, fittedChannels));
        if (refractiveIndex !== null) runner.setRefractiveIndex(refractiveIndex);
        running = runner;
      }
      if (refractiveIndexAt !== undefined) runner.setRefractiveIndex(refractiveIndexAt((block.sampleIndex + block.samplesPerFrame / 2) / block.rateHz));
      if (options.referenceMarks !== false) referenceAtMarks(runner, block);
      positions.rateHz = rateHz;
      positions.block = block;
      positions.summaries = runner.process(block);
      subscriber.next(positions);
    }

    /** Fits every 'fit' axis to the held samples; on success they go through the pipelines. */
    function tryFit(final: boolean): void {
      attempts++;
      const heldSamples = held.samples;
      const results = options.axes.map((_, k) => (fitted[k] ? fitAxis(held, options.axes[k]!.channelPair ?? k) : null));
      const ok = results.every((result) => result === null || result.ok);
      const givingUp = !ok && (final || attempts >= fitAttempts);
      results.forEach((result, k) => {
        if (result !== null) subscriber.next({ kind: 'fit', axis: probe.names[k]!, result, heldSamples, final: result.ok || givingUp });
      });
      if (!ok) {
        if (givingUp) {
          const failed = results.findIndex((result) => result !== null && !result.ok);
          const reason = (results[failed] as Extract<EllipseFitResult, { ok: false }>).message;
          throw new Error(
            `cannot fit the correction of axis ${probe.names[failed]} to the first ${heldSamples} samples (${reason}); ` +
              'move the stage over at least one fringe while it starts, hold more samples for the fit, or give a calibration',
          );
        }
        nextFitAt += fitSamples;
        return;
      }
      results.forEach((result, k) => {
        if (result !== null && result.ok) {
          // Three or four outputs: their parameters calibrate the axis, the ellipse is that of their normalised pair.
          if (result.channels === undefined) calibrations[k] = result.calibration;
          else fittedChannels[k] = result.channels;
          fitResiduals[k] = result.residualRms;
        }
      });
      const { values, segments } = held;
      for (const segment of segments) {
        for (let done = 0; done < segment.samples; done += REPLAY_BLOCK) {
          const n = Math.min(REPLAY_BLOCK, segment.samples - done);
          const from = segment.start + done * segment.channelCount;
          // The segment's edges go with its first part (they are in absolute sample time).
          const edgeCount = done === 0 ? segment.edgeTime.length : 0;
          run({
            kind: 'samples',
            samples: values.subarray(from, from + n * segment.channelCount),
            channelCount: segment.channelCount,
            axisOutputs: segment.axisOutputs,
            samplesPerFrame: n,
            gapBefore: done === 0 ? segment.gapBefore : 0,
            sampleIndex: segment.sampleIndex + done,
            rateHz: segment.rateHz,
            edgeCount,
            edgeTime: segment.edgeTime,
            edgeLine: segment.edgeLine,
            edgeRising: segment.edgeRising,
          });
        }
      }
      held.clear();
    }

    function take(block: LinkBlock): void {
      // Written only when it changes: a double stored in a closure's variable costs a heap number each time.
      if (rateHz !== block.rateHz) rateHz = block.rateHz;
      subscriber.next(block);
      if (runner === null && holding) {
        held.add(block);
        if (held.samples >= nextFitAt) tryFit(false);
      } else {
        run(block);
      }
    }

    /** Ends the stream: a last fit over what is held, then complete. */
    function end(): void {
      if (ended) return;
      ended = true;
      subscription?.unsubscribe();
      if (runner === null && held.samples > 0) tryFit(true);
      subscriber.complete();
    }

    const reader = createLinkReader({
      ...link,
      onBlock(block) {
        if (ended) return;
        if (durationS !== undefined && stopAfter === Number.POSITIVE_INFINITY) stopAfter = Math.max(1, Math.round(durationS * block.rateHz));
        const n = block.samplesPerFrame;
        if (count.received + n < stopAfter) {
          count.received += n;
          take(block);
          return;
        }
        // The stop falls in this block: hand out its part before the stop (and the edges in it), then end.
        const keep = stopAfter - count.received;
        count.received += keep;
        const cut = block.sampleIndex + keep;
        // The rest of the block is never used: its edges' arrays can be compacted in place.
        let edgeCount = 0;
        for (let e = 0; e < block.edgeCount; e++) {
          if (Math.ceil(block.edgeTime[e]!) >= cut) continue;
          block.edgeTime[edgeCount] = block.edgeTime[e]!;
          block.edgeLine[edgeCount] = block.edgeLine[e]!;
          block.edgeRising[edgeCount] = block.edgeRising[e]!;
          edgeCount++;
        }
        take({ ...block, samples: block.samples.subarray(0, keep * block.channelCount), samplesPerFrame: keep, edgeCount });
        end();
      },
      onGap(gap) {
        if (!ended) subscriber.next(gap);
      },
      onDuplicate(duplicate) {
        if (!ended) subscriber.next(duplicate);
      },
      onLink: (event) => ended || subscriber.next(event),
    });
    linkStatus = reader.status;
    emit = (reading) => {
      if (!ended) subscriber.next(reading);
    };
    let subscription: Subscription | null = null;
    subscription = source.open().subscribe({
      next(event) {
        try {
          reader.push(event);
        } catch (error) {
          ended = true;
          subscriber.error(error);
        }
      },
      error: (error: unknown) => subscriber.error(error),
      complete() {
        try {
          end();
        } catch (error) {
          subscriber.error(error);
        }
      },
    });
    if (ended) subscription.unsubscribe();
    return () => {
      subscription?.unsubscribe();
      running = null;
      emit = null;
    };
  }).pipe(share({ connector: () => createRelay<LiveReading>() }));

  const summaries$ = readings$.pipe(
    filter((reading): reading is LivePositions => reading.kind === 'positions'),
    map((reading) => reading.summaries),
  );
  const axes = createAxesView(
    summaries$,
    {
      names: probe.names,
      setRefractiveIndex(next) {
        probe.setRefractiveIndex(next);
        (running as AxesRunner | null)?.setRefractiveIndex(next);
        refractiveIndex = next;
      },
    },
    options,
  );
  return {
    ...axes,
    readings$,
    link$: readings$.pipe(filter((reading): reading is LinkEvent => reading.kind === 'link')),
    gaps$: readings$.pipe(filter((reading): reading is LinkGap => reading.kind === 'gap')),
    get linkStatus() {
      return linkStatus;
    },
    reReference(request = {}) {
      const { axis: named, presetM = 0, origin = '' } = request;
      const axis = typeof named === 'string' ? probe.names.indexOf(named) : named;
      if (axis === -1) throw new OptionError('axis', `one of ${probe.names.join(', ')}`, named);
      const runner = running as AxesRunner | null;
      if (runner === null) {
        // Checked all the same, so that a bad request is refused whenever it comes.
        probe.reReference({ ...(axis === undefined ? {} : { axis }), presetM });
        probe.reset();
        return null;
      }
      const sampleIndex = runner.nextSampleIndex;
      runner.reReference({ ...(axis === undefined ? {} : { axis }), presetM });
      const done: LiveReference = { kind: 'reference', axes: axis === undefined ? [...runner.names] : [runner.names[axis]!], sampleIndex, presetM, origin };
      (emit as ((reading: LiveReading) => void) | null)?.(done);
      return done;
    },
  };
}

/**
 * Requests a re-reference of every axis at the first sample after each rising reference-mark edge in the block,
 * preset to the motion from the mark to that sample (its fraction of a period at the axis' latest velocity), so
 * that the position at the mark itself reads zero. The velocity is the step between the two latest positions:
 * unlike the tracking loop's, it has no settling lag.
 */
function referenceAtMarks(runner: AxesRunner, block: LinkBlock): void {
  for (let e = 0; e < block.edgeCount; e++) {
    if (block.edgeLine[e] !== WireEdgeLine.referenceMark || block.edgeRising[e] !== 1) continue;
    const at = Math.ceil(block.edgeTime[e]!);
    if (at < runner.nextSampleIndex) continue; // a mark the axes have passed already cannot be re-referenced at
    const leadS = (at - block.edgeTime[e]!) / block.rateHz;
    runner.names.forEach((_, axis) => {
      const latest = runner.summaries[axis]!;
      const positions = latest.output.positionM;
      const velocity = latest.length >= 2 ? (positions[latest.length - 1]! - positions[latest.length - 2]!) * block.rateHz : latest.velocityMS;
      runner.reReference({ axis, atSampleIndex: at, presetM: Number.isFinite(velocity) ? velocity * leadS : 0 });
    });
  }
}

/** The first channel of frame axis `axis` in interleaved frames of this layout, and its output count. */
function channelsOf(axisOutputs: readonly number[], axis: number): { first: number; count: number } {
  const count = axisOutputs[axis];
  if (count === undefined) throw new Error(`the frames carry ${axisOutputs.length} axes: there is no axis ${axis} to fit`);
  let first = 0;
  for (let a = 0; a < axis; a++) first += axisOutputs[a]!;
  return { first, count };
}

/**
 * The fit of one axis over the held samples, as calibrate makes it (`createDetectorFit`: for 3 or 4 outputs the
 * source power first; then all samples, then only those near the first fit's ellipse), so that a blocked beam or
 * a glitch during the first samples does not pull the fit. The held frames must give the axis one output count.
 */
function fitAxis(held: ReturnType<typeof createHoldStore>, frameAxis: number): DetectorFitResult {
  const { count } = channelsOf(held.segments[0]!.axisOutputs, frameAxis);
  const inputs = Array.from({ length: count }, () => new Float64Array(REPLAY_BLOCK));
  /** Feeds every held sample of the axis, block by block, to `take`. */
  const each = (take: (length: number) => void): void => {
    for (const segment of held.segments) {
      const layout = channelsOf(segment.axisOutputs, frameAxis);
      if (layout.count !== count) throw new Error(`the frames changed axis ${frameAxis} from ${count} to ${layout.count} detector outputs during the live fit`);
      for (let done = 0; done < segment.samples; done += REPLAY_BLOCK) {
        const n = Math.min(REPLAY_BLOCK, segment.samples - done);
        const from = segment.start + done * segment.channelCount + layout.first;
        for (let c = 0; c < count; c++) {
          const input = inputs[c]!;
          for (let i = 0, at = from + c; i < n; i++, at += segment.channelCount) input[i] = held.values[at]!;
        }
        take(n);
      }
    }
  };
  const fit = createDetectorFit({ channelCount: count });
  for (;;) {
    each((n) => fit.add(inputs, n));
    const result = fit.endPass();
    if (result !== null) return result;
  }
}
