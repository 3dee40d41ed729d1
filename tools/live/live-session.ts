// The live loop of `fringetally listen` over the library's chain (`trackLink`): byte source → bounded input queue
// → link reader → live fit → one pipeline per axis → sinks. Every sink (rows, record, status, network feed)
// sees the same readings. The sinks' writes are awaited one at a time; while they are slow the source's chunks
// wait in a queue of at most `maxBufferedBytes`, and past that the session stops, naming the output that stalled.

import { alarmKinds, type AlarmKind } from '../../src/core/index.js';
import {
  trackLink,
  type LinkBlock,
  type LinkDuplicate,
  type LinkGap,
  type LinkReaderStatus,
  type LiveAxes,
  type LiveFit,
  type LivePositions,
  type LiveReference,
  type TrackLinkOptions,
} from '../../src/io/live/index.js';
import type { ByteSource, ByteSourceEvent, LinkEvent } from '../../src/io/serial/index.js';
import { createRelay, type Relay } from '../../src/stream/index.js';
import { queueObservable } from './event-queue.js';

/** Work a sink hands back from a reading: run after the reading's chunk, one at a time, awaited. */
export type SinkJob = () => Promise<void>;

export interface LiveSink {
  /** Names the output in messages, e.g. `the result output run.csv`. */
  readonly name: string;
  /** Every block of samples as decoded (before any fit hold). Copy what the job needs: the arrays are reused. */
  samples?(block: LinkBlock): SinkJob | void;
  /** Every position block of the axes. Copy what the job needs: the arrays are reused. */
  positions?(positions: LivePositions): SinkJob | void;
  /** Gaps, repeated frames dropped, link changes, fit attempts and re-references, as they happen. */
  notice?(notice: LinkGap | LinkDuplicate | LinkEvent | LiveFit | LiveReference): void;
}

export interface LiveSessionOptions {
  readonly source: ByteSource;
  /** The chain: axes, link settings, live fit, duration. */
  readonly track: TrackLinkOptions;
  readonly sinks: readonly LiveSink[];
  /** Most bytes of input kept waiting while a sink's write is pending; positive integer. */
  readonly maxBufferedBytes: number;
  /**
   * Called after a chunk in which the decoder refused frames its size limit does not admit (their count grew),
   * with the decoder's counters: the caller can name the limit to raise while the run goes on.
   */
  readonly onOversizeFrames?: (wire: NonNullable<LinkReaderStatus['wire']>) => void;
  /** After the signal, time left to process what was received before the session ends regardless, ms. Default 500. */
  readonly stopGraceMs?: number;
}

/** What the axes' pipelines made, for the status line and the summary (axis 0 of `track.axes`). */
export interface LiveProgress {
  calibration: 'given' | 'fitting' | 'fitted';
  samplesProcessed: number;
  positionM: number;
  velocityMS: number;
  level: number;
  flags: number;
  countLost: boolean;
  alarmsRaised: Record<AlarmKind, number>;
}

export interface LiveSummary {
  /** `stalled`: a sink's write did not finish while the input buffer filled (see `stalledSink`). */
  readonly stopReason: 'duration' | 'signal' | 'source ended' | 'stalled';
  /** The sink whose pending write stopped the session (`stalled`), or was cut off by the signal's grace time. */
  readonly stalledSink: string | null;
  readonly progress: Readonly<LiveProgress>;
  /** The link reader's counters; null when the source never opened. */
  readonly link: Readonly<LinkReaderStatus> | null;
  readonly gaps: readonly LinkGap[];
  /** Every gap by cause: how many and the samples counted lost (for `resync`, the 1 marked per gap). */
  readonly gapsByCause: Readonly<Record<LinkGap['cause'], { readonly count: number; readonly lostSamples: number }>>;
  /** Repeated frames dropped (the first `MAX_GAP_RECORDS`; the link status counts them all). */
  readonly duplicates: readonly LinkDuplicate[];
  readonly links: readonly LinkEvent[];
  readonly fits: readonly LiveFit[];
  /** Re-references on demand (key, signal, command), the first `MAX_LINK_RECORDS`. */
  readonly references: readonly LiveReference[];
}

export interface LiveSession {
  readonly axes: LiveAxes;
  readonly progress: Readonly<LiveProgress>;
  /** The link reader's counters once the chain runs. */
  readonly link: Readonly<LinkReaderStatus> | null;
  /** Settles when the duration is reached, the signal stopped the session, the source ended or a sink stalled; rejects on a chain or sink error. */
  readonly done: Promise<LiveSummary>;
}

/**
 * Most bytes of waiting chunks taken in together: a chain behind its source catches up in blocks of up to this
 * size (about 4000 samples of 2 channels) instead of one block per chunk, where per-block costs would hold it back.
 * Not more: blocks of 64 KiB ran the chain about a fifth slower than 16 KiB (their outputs leave the caches).
 */
const JOIN_BYTES = 16_384;

/** Gap and link records kept for the summary; beyond these only the counters grow. */
const MAX_GAP_RECORDS = 10_000;
const MAX_LINK_RECORDS = 1000;

/** Builds the chain now (its options are checked here, before the source opens); `start()` opens the source. */
export function createLiveSession(options: LiveSessionOptions): {
  readonly axes: LiveAxes;
  /** Opens the source and runs. Aborting `signal` stops reading; chunks already received are processed within `stopGraceMs`. */
  start(signal?: AbortSignal): LiveSession;
} {
  // The chain's input, pushed by the loop below (a relay: rxjs's Subject allocated on every block).
  const input = createRelay<ByteSourceEvent>();
  const axes = trackLink({ name: options.source.name, open: () => input }, options.track);
  return { axes, start: (signal) => run(options, axes, input, signal) };
}

function run(options: LiveSessionOptions, axes: LiveAxes, input: Relay<ByteSourceEvent>, signal: AbortSignal | undefined): LiveSession {
  const { sinks } = options;
  const stopGraceMs = options.stopGraceMs ?? 500;
  const progress: LiveProgress = {
    calibration: options.track.axes[0]!.calibration === 'fit' ? 'fitting' : 'given',
    samplesProcessed: 0,
    positionM: Number.NaN,
    velocityMS: Number.NaN,
    level: Number.NaN,
    flags: 0,
    countLost: false,
    alarmsRaised: Object.fromEntries(alarmKinds.map((kind) => [kind, 0])) as Record<AlarmKind, number>,
  };
  const gaps: LinkGap[] = [];
  const duplicates: LinkDuplicate[] = [];
  const gapsByCause = { sequence: { count: 0, lostSamples: 0 }, link: { count: 0, lostSamples: 0 }, resync: { count: 0, lostSamples: 0 } };
  const links: LinkEvent[] = [];
  const fits: LiveFit[] = [];
  const references: LiveReference[] = [];
  // Jobs waiting their turn, in order, beside their sinks (two arrays: no record a job).
  const jobs: SinkJob[] = [];
  const jobSinks: LiveSink[] = [];
  let chainEnded = false;
  let chainFailure: { error: unknown } | null = null;
  let durationReached = false;
  let sourceEnded = false;

  const subscription = axes.readings$.subscribe({
    next(reading) {
      if (reading.kind === 'samples') {
        // Indexed loops here and below: this runs for every block, and for-of left an iterator per loop.
        for (let k = 0; k < sinks.length; k++) {
          const job = sinks[k]!.samples?.(reading);
          if (job) {
            jobs.push(job);
            jobSinks.push(sinks[k]!);
          }
        }
        return;
      }
      if (reading.kind === 'positions') {
        const summary = reading.summaries[0]!;
        progress.samplesProcessed += summary.length;
        if (summary.length > 0) {
          progress.positionM = summary.positionM;
          progress.velocityMS = summary.velocityMS;
          progress.level = summary.level;
          progress.flags = summary.flags;
        }
        progress.countLost = summary.countLost;
        const { events } = summary;
        for (let e = 0; e < events.length; e++) if (events[e]!.state === 'raised') progress.alarmsRaised[events[e]!.kind]++;
        for (let k = 0; k < sinks.length; k++) {
          const job = sinks[k]!.positions?.(reading);
          if (job) {
            jobs.push(job);
            jobSinks.push(sinks[k]!);
          }
        }
        return;
      }
      if (reading.kind === 'gap') {
        if (gaps.length < MAX_GAP_RECORDS) gaps.push(reading);
        gapsByCause[reading.cause].count++;
        gapsByCause[reading.cause].lostSamples += reading.lostSamples;
      }
      if (reading.kind === 'duplicate' && duplicates.length < MAX_GAP_RECORDS) duplicates.push(reading);
      if (reading.kind === 'link' && links.length < MAX_LINK_RECORDS) links.push(reading);
      if (reading.kind === 'reference' && references.length < MAX_LINK_RECORDS) references.push(reading);
      if (reading.kind === 'fit') {
        fits.push(reading);
        if (reading.result.ok) progress.calibration = 'fitted';
      }
      for (const sink of sinks) sink.notice?.(reading);
    },
    error(error: unknown) {
      chainFailure = { error };
    },
    complete() {
      chainEnded = true;
      // Completing before the source ended means the duration was reached.
      durationReached = !sourceEnded;
    },
  });

  async function loop(): Promise<LiveSummary> {
    let overflowed = false;
    // One wait at a time, each interruptible. Not Promise.race against one long-lived promise: every race left a
    // reaction on it that held the race's result, so each input chunk stayed in memory for the whole session.
    let interruptedNow = false;
    let wake: (() => void) | null = null;
    const interrupt = () => {
      interruptedNow = true;
      wake?.();
    };
    // Settles in the order Promise.race([promise, interrupted]) would: the promise's own result first when it is
    // already there, the interruption one microtask after interrupt().
    const untilInterrupted = <T>(promise: Promise<T>): Promise<T | 'interrupted'> =>
      new Promise<T | 'interrupted'>((resolve, reject) => {
        promise.then(resolve, reject);
        const mine = () => void Promise.resolve().then(() => resolve('interrupted'));
        if (interruptedNow) return mine();
        wake = mine;
        const release = () => {
          if (wake === mine) wake = null;
        };
        promise.then(release, release);
      });
    const queue = queueObservable<ByteSourceEvent>(options.source.open(), {
      maxSize: options.maxBufferedBytes,
      sizeOf: (event) => (event instanceof Uint8Array ? event.length : 0),
      onOverflow() {
        overflowed = true;
        interrupt();
      },
    });
    let signalled = false;
    let graceTimer: ReturnType<typeof setTimeout> | null = null;
    const onAbort = () => {
      signalled = true;
      queue.stop();
      graceTimer = setTimeout(interrupt, stopGraceMs);
    };
    if (signal?.aborted) onAbort();
    else signal?.addEventListener('abort', onAbort, { once: true });
    let stalledSink: string | null = null;
    let oversizeSeen = 0;
    // The chunks taken together are copied into this one: nothing in the chain keeps a chunk after its push.
    const joined = new Uint8Array(JOIN_BYTES);
    // The view of the last joined length, kept: the same length comes again and again (whole chunks of one size).
    let joinedView = joined.subarray(0, 0);
    /** `first` and the byte chunks waiting right behind it, as one chunk of at most JOIN_BYTES (`first` alone if longer). */
    const join = (first: Uint8Array): Uint8Array => {
      let next = queue.peek();
      if (!(next instanceof Uint8Array) || first.length + next.length > JOIN_BYTES) return first;
      joined.set(first);
      let length = first.length;
      do {
        queue.poll();
        joined.set(next, length);
        length += next.length;
        next = queue.peek();
      } while (next instanceof Uint8Array && length + next.length <= JOIN_BYTES);
      if (joinedView.length !== length) joinedView = joined.subarray(0, length);
      return joinedView;
    };
    try {
      outer: for (;;) {
        // A chunk already waiting is taken at once: the wait would hand it out all the same (its result comes before
        // an interruption's), after a few promises and microtask turns per block.
        const event = queue.length > 0 ? queue.poll()! : await untilInterrupted(queue.next());
        if (event === 'interrupted') break;
        if (event === null) {
          sourceEnded = true;
          input.complete();
        } else input.next(event instanceof Uint8Array ? join(event) : event);
        const wire = axes.linkStatus?.wire;
        if (wire && wire.oversizeHeaders > oversizeSeen) {
          oversizeSeen = wire.oversizeHeaders;
          options.onOversizeFrames?.(wire);
        }
        // Jobs added while one is awaited run in this turn too (the length is read again each time).
        for (let k = 0; k < jobs.length; k++) {
          if ((await untilInterrupted(jobs[k]!())) === 'interrupted') {
            stalledSink = jobSinks[k]!.name;
            break outer;
          }
        }
        // Only when not empty: setting an array's length is a call into the runtime (~0.1 µs), even to the same value.
        if (jobs.length !== 0) {
          jobs.length = 0;
          jobSinks.length = 0;
        }
        if (chainFailure !== null) throw (chainFailure as { error: unknown }).error;
        if (chainEnded) break;
      }
    } finally {
      signal?.removeEventListener('abort', onAbort);
      if (graceTimer !== null) clearTimeout(graceTimer);
      queue.stop();
      subscription.unsubscribe();
    }
    const stopReason: LiveSummary['stopReason'] = overflowed ? 'stalled' : durationReached ? 'duration' : signalled ? 'signal' : 'source ended';
    return { stopReason, stalledSink, progress, link: axes.linkStatus, gaps, gapsByCause, duplicates, links, fits, references };
  }

  return {
    axes,
    progress,
    get link() {
      return axes.linkStatus;
    },
    done: loop(),
  };
}
