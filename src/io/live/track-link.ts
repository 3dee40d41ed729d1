// Bytes to positions in one call: a byte source (serial port or any other) → link reader (decoder, gap rules) →
// one pipeline per axis → per-subscriber position, velocity, alarms and status. Every sink of a live session
// (rows, status, recorder, network feeds) subscribes to the one shared chain, so all see the same count.

import { Observable, OperatorFunction, filter, map, share } from 'rxjs';
import {
  createAxesRunner,
  createAxesView,
  type Axes,
  type AxesRunner,
  type AxesRunnerOptions,
  type AxesViewOptions,
  type AxisBlockSummary,
  type AxisOptions,
} from '../../stream/index.js';
import type { ByteSource, ByteSourceEvent, LinkEvent } from '../serial/index.js';
import { WireEdgeLine } from '../wire/index.js';
import { createLinkReader, type LinkBlock, type LinkGap, type LinkReaderOptions, type LinkReaderStatus } from './link-reader.js';

/** The link reader's settings (without its callbacks). */
export type LinkOptions = Omit<LinkReaderOptions, 'onBlock' | 'onGap' | 'onLink'>;

/** What a link reader hands on, in order: blocks of samples, gaps before them, link changes. */
export type LinkReading = LinkBlock | LinkGap | LinkEvent;

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

/** One axis of a live link: the pipeline options, the rate aside (it comes from the frames or `link.rateHz`). */
export type LiveAxisOptions = Omit<AxisOptions, 'rateHz'>;

export interface TrackLinkOptions extends Omit<AxesRunnerOptions, 'axes'>, AxesViewOptions {
  /** Axis k reads channels 2k (x) and 2k + 1 (y); 1..8 axes. */
  readonly axes: readonly LiveAxisOptions[];
  /** How the bytes are read: frames or text lines, frame size limit, sample rate when the frames carry none. */
  readonly link?: LinkOptions;
  /**
   * Re-reference every axis at each rising edge of the reference-mark input (edge line 1 of version 2 frames):
   * the position at the mark reads zero. Default true; false leaves the marks to `latchEdges` only.
   */
  readonly referenceMarks?: boolean;
}

/** A block of samples with every axis' position block for it (`summaries`, reused: read inside `next`). */
export interface LiveBlock {
  readonly kind: 'samples';
  readonly block: LinkBlock;
  readonly summaries: readonly AxisBlockSummary[];
}

export type LiveReading = LiveBlock | LinkGap | LinkEvent;

export interface LiveAxes extends Axes {
  /** Everything in order: position blocks of all axes, gaps, link changes. Shared with the axes. */
  readonly readings$: Observable<LiveReading>;
  /** Link changes (up, down and why). */
  readonly link$: Observable<LinkEvent>;
  /** Gaps: samples lost in transport, with their absolute index and cause. */
  readonly gaps$: Observable<LinkGap>;
  /** The running reader's counters (link, samples, gaps, decoder); null while nothing runs. */
  readonly linkStatus: Readonly<LinkReaderStatus> | null;
  /**
   * Zero (or preset to `presetM`, m) one axis or every axis at the next sample, and clear its count-lost latch
   * there: for a terminal key, a signal or an authenticated command. Before the first sample it does nothing
   * (the first sample is the reference anyway).
   */
  reReference(options?: { readonly axis?: number; readonly presetM?: number }): void;
}

/** A rate used only to check the axis options before the frames tell the true one; no rate rule binds at it. */
const PROBE_RATE_HZ = 1e12;

/**
 * Tracks the axes of a byte source. Options are checked here (the rate's own rules again at the first
 * samples when the frames give it); the source opens with the first subscriber (or `connect()`) and closes
 * after the last leaves. The stream ends with an error when the source gives up or the frames contradict the
 * options.
 */
export function trackLink(source: ByteSource, options: TrackLinkOptions): LiveAxes {
  const link = options.link ?? {};
  const runnerOptions = (rateHz: number): AxesRunnerOptions => ({
    axes: options.axes.map((axis) => ({ ...axis, rateHz })),
    ...(options.tracePoints === undefined ? {} : { tracePoints: options.tracePoints }),
    ...(options.tracePointsPerBlock === undefined ? {} : { tracePointsPerBlock: options.tracePointsPerBlock }),
  });
  const probe = createAxesRunner(runnerOptions(link.rateHz ?? PROBE_RATE_HZ));
  readLink(link);
  let running: AxesRunner | null = null;
  let refractiveIndex: number | null = null;
  let linkStatus: Readonly<LinkReaderStatus> | null = null;

  const readings$ = new Observable<LiveReading>((subscriber) => {
    let runner: AxesRunner | null = null;
    const reading: { kind: 'samples'; block: LinkBlock; summaries: readonly AxisBlockSummary[] } = { kind: 'samples', block: null!, summaries: [] };
    const reader = createLinkReader({
      ...link,
      onBlock(block) {
        if (runner === null) {
          runner = createAxesRunner(runnerOptions(block.rateHz));
          if (refractiveIndex !== null) runner.setRefractiveIndex(refractiveIndex);
          running = runner;
        }
        if (options.referenceMarks !== false) referenceAtMarks(runner, block);
        reading.block = block;
        reading.summaries = runner.process(block);
        subscriber.next(reading);
      },
      onGap: (gap) => subscriber.next(gap),
      onLink: (event) => subscriber.next(event),
    });
    linkStatus = reader.status;
    const subscription = source.open().subscribe({
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
    return () => {
      subscription.unsubscribe();
      running = null;
    };
  }).pipe(share());

  const summaries$ = readings$.pipe(
    filter((reading): reading is LiveBlock => reading.kind === 'samples'),
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
      (running as AxesRunner | null)?.reReference(request);
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
