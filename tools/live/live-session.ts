// The live loop of `fringetally listen`: byte chunks and link events from a byte source → wire (or text line)
// decoder → optional live ellipse fit (Heydemann 1981) on the first samples → pipeline → sinks, one block per
// chunk. Sinks (result file, record file, status line, a network feed) subscribe to raw and processed blocks.

import {
  createTwoPassFit,
  type AlarmEvent,
  type AlarmKind,
  type EllipseCalibration,
  type EllipseFitResult,
  type Pipeline,
} from '../../src/core/index.js';
import { createPipeline } from '../../src/accel/index.js';
import { isLinkEvent, type ByteSource, type ByteSourceEvent, type LinkEvent } from '../../src/io/serial/index.js';
import {
  createLineDecoder,
  createWireDecoder,
  type InputGap,
  type LineDecoder,
  type LineDecoderCounters,
  type SampleBlock,
  type WireDecoder,
  type WireDecoderCounters,
} from '../../src/io/wire/index.js';
import type { MeasureSettings } from '../capture-run.js';
import { queueObservable } from './event-queue.js';

export interface LiveSessionOptions {
  readonly source: ByteSource;
  /** `binary`: wire frames (docs/wire-format.md); `text`: `x,y` lines (no sequence, so no gap detection). */
  readonly mode: 'binary' | 'text';
  /** Axis tracked: channels 2·axis (x) and 2·axis + 1 (y). Default 0. */
  readonly axis?: number;
  /** Text mode: integers per line, even 2..16. Default 2·(axis + 1). */
  readonly textChannels?: number;
  /** Binary mode: largest samples per frame accepted, 1..4096. Default 1024. */
  readonly maxSamplesPerFrame?: number;
  /** Sample rate, Hz. Default: the frames' rate field (binary); required in text mode. Must agree with the frames when both are given. */
  readonly rateHz?: number;
  readonly settings: MeasureSettings;
  /** Ellipse correction; null fits one to the first `fitSamples` samples, which are held back until then. */
  readonly calibration: EllipseCalibration | null;
  /** Samples held back for the live fit; integer 64..2^24. Default 16384. Retried every as many more, up to 8 times. */
  readonly fitSamples?: number;
  /** Stop after this many seconds of samples (absolute index, lost samples included); default: until `signal` or the source ends. */
  readonly durationS?: number;
  readonly sinks: readonly LiveSink[];
  /** Aborting stops reading; chunks already received are still processed. */
  readonly signal?: AbortSignal;
}

export interface LiveStreamInfo {
  readonly rateHz: number;
  /** Where the rate came from. */
  readonly rateSource: 'frames' | 'option';
  readonly channelCount: number;
  readonly axis: number;
}

/** One processed block: contiguous absolute sample indices. Arrays are reused: valid until the sink's promise settles. */
export interface LiveBlock {
  /** Absolute index of the first sample (samples delivered plus samples lost in gaps, from the first sample seen). */
  readonly firstIndex: number;
  readonly length: number;
  /** The raw samples of the block (tracked axis). */
  readonly x: Int16Array;
  readonly y: Int16Array;
  /** Samples lost in transport just before this block (0 when none). */
  readonly gapBefore: number;
  readonly rateHz: number;
  readonly positionM: Float64Array;
  readonly velocityMS: Float64Array;
  readonly level: Float32Array;
  readonly flags: Uint8Array;
  /** Alarm changes inside this block, in index order. */
  readonly events: readonly AlarmEvent[];
  /** performance.now() (ms) at the arrival of the chunk whose decoding let this block be processed. */
  readonly arrivalMs: number;
}

/** A gap marked in the pipeline (input gap, count lost). */
export interface LiveGap {
  /** Absolute index of the first sample after the gap. */
  readonly sampleIndex: number;
  readonly lostSamples: number;
  /**
   * `sequence`: a jump of the frame counter; `link`: after a link outage (lost samples from the counter, at least 1);
   * `resync`: the counter restarted or went backwards, length unknown (marked as the least, 1 sample).
   */
  readonly cause: 'sequence' | 'link' | 'resync';
}

export type LiveNotice =
  | { readonly kind: 'link'; readonly event: LinkEvent }
  | { readonly kind: 'gap'; readonly gap: LiveGap }
  | { readonly kind: 'fit'; readonly fit: EllipseFitResult; readonly heldSamples: number; readonly final: boolean };

export interface LiveSink {
  /** Once, when the first samples arrived and the rate is known; before any other data callback. */
  start?(info: LiveStreamInfo): void | Promise<void>;
  /**
   * Every delivered sample of the tracked axis, in order, as soon as it is decoded (before any fit hold), lost
   * samples absent; `recordIndex` counts delivered samples only. Arrays valid until the promise settles.
   */
  raw?(x: Int16Array, y: Int16Array, length: number, recordIndex: number): void | Promise<void>;
  block?(block: LiveBlock): void | Promise<void>;
  notice?(notice: LiveNotice): void;
}

export interface LiveStatus {
  link: 'waiting' | 'up' | 'down';
  /** Outages seen (up → down). */
  linkDowns: number;
  /** Reconnections after an outage. */
  linkReturns: number;
  /** NaN until the first samples. */
  rateHz: number;
  calibration: 'file' | 'fitting' | 'fitted';
  samplesDelivered: number;
  /** Next absolute index: delivered plus lost. */
  nextSampleIndex: number;
  /** Samples processed by the pipeline (delivered minus those still held for the fit). */
  samplesProcessed: number;
  gaps: number;
  lostSamples: number;
  positionM: number;
  velocityMS: number;
  level: number;
  flags: number;
  countLost: boolean;
  alarmsRaised: Record<AlarmKind, number>;
  readonly wire: Readonly<WireDecoderCounters> | null;
  readonly text: Readonly<LineDecoderCounters> | null;
}

export interface LiveSummary {
  readonly stopReason: 'duration' | 'signal' | 'source ended';
  readonly status: Readonly<LiveStatus>;
  readonly info: LiveStreamInfo | null;
  readonly calibration: EllipseCalibration | null;
  /** The live fit, when one was made. */
  readonly fit: Extract<EllipseFitResult, { ok: true }> | null;
  readonly gaps: readonly LiveGap[];
  readonly links: readonly LinkEvent[];
}

/** Gap records kept for the summary; beyond this only the counters grow. */
const MAX_GAP_RECORDS = 10_000;
const MAX_LINK_RECORDS = 1000;
const MAX_FIT_ATTEMPTS = 8;
/** Byte that spoils a half-received text line at an outage (see onLinkDown). */
const SPOIL_LINE = Uint8Array.of(0x23);

interface GapMark {
  at: number;
  lost: number;
  cause: LiveGap['cause'];
}

function check(condition: boolean, message: string): void {
  if (!condition) throw new RangeError(message);
}

/** Growable pair of int16 columns with gap marks between samples. */
function createSampleStore(initialCapacity: number) {
  const store = {
    x: new Int16Array(initialCapacity),
    y: new Int16Array(initialCapacity),
    length: 0,
    marks: [] as GapMark[],
    reserve(extra: number): void {
      const needed = store.length + extra;
      if (needed <= store.x.length) return;
      let capacity = store.x.length;
      while (capacity < needed) capacity *= 2;
      const x = new Int16Array(capacity);
      const y = new Int16Array(capacity);
      x.set(store.x.subarray(0, store.length));
      y.set(store.y.subarray(0, store.length));
      store.x = x;
      store.y = y;
    },
    clear(): void {
      store.length = 0;
      store.marks.length = 0;
    },
  };
  return store;
}
type SampleStore = ReturnType<typeof createSampleStore>;

export interface LiveSession {
  /** Live counters and latest values, updated as blocks are processed; read them, do not write them. */
  readonly status: Readonly<LiveStatus>;
  /**
   * Settles when the duration is reached, `signal` aborts, or the source completes; rejects on a source error, a
   * sink error, a stream the options cannot read (rate, axis), or a live fit that fails for good.
   */
  readonly done: Promise<LiveSummary>;
}

/** Validates the options (throws RangeError naming the option) and starts reading the source. */
export function startLiveSession(options: LiveSessionOptions): LiveSession {
  const axis = options.axis ?? 0;
  check(Number.isInteger(axis) && axis >= 0 && axis <= 7, `axis must be an integer in 0..7 (got ${axis})`);
  const textChannels = options.textChannels ?? 2 * (axis + 1);
  const fitSamples = options.fitSamples ?? 16384;
  check(Number.isInteger(fitSamples) && fitSamples >= 64 && fitSamples <= 2 ** 24, `fitSamples must be an integer in 64..16777216 (got ${fitSamples})`);
  const rateOption = options.rateHz;
  check(rateOption === undefined || (Number.isFinite(rateOption) && rateOption > 0), `rateHz must be a positive finite number (got ${rateOption})`);
  const durationS = options.durationS;
  check(durationS === undefined || (Number.isFinite(durationS) && durationS > 0), `durationS must be a positive finite number (got ${durationS})`);
  if (options.mode === 'text') {
    check(rateOption !== undefined, 'text lines carry no sample rate: give rateHz');
    check(Number.isInteger(textChannels) && textChannels >= 2 && textChannels <= 16 && textChannels % 2 === 0, `textChannels must be even, 2..16 (got ${textChannels})`);
    check(2 * axis + 1 < textChannels, `axis ${axis} needs at least ${2 * axis + 2} channels per line (textChannels is ${textChannels})`);
  }
  const { sinks, settings } = options;

  // The callbacks run only inside push(), after everything below is initialised.
  const wire: WireDecoder | null =
    options.mode === 'binary' ? createWireDecoder({ maxSamplesPerFrame: options.maxSamplesPerFrame ?? 1024, onFrame: onSamples, onGap }) : null;
  const text: LineDecoder | null =
    options.mode === 'text' ? createLineDecoder({ channelCount: textChannels, maxSamplesPerBlock: 1024, onBlock: onSamples }) : null;
  const status: LiveStatus = {
    link: 'waiting',
    linkDowns: 0,
    linkReturns: 0,
    rateHz: Number.NaN,
    calibration: options.calibration === null ? 'fitting' : 'file',
    samplesDelivered: 0,
    nextSampleIndex: 0,
    samplesProcessed: 0,
    gaps: 0,
    lostSamples: 0,
    positionM: Number.NaN,
    velocityMS: Number.NaN,
    level: Number.NaN,
    flags: 0,
    countLost: false,
    alarmsRaised: { lowSignal: 0, saturation: 0, badSample: 0, overspeed: 0, inputGap: 0, countLost: 0, lowPower: 0 },
    wire: wire === null ? null : wire.counters,
    text: text === null ? null : text.counters,
  };
  const gaps: LiveGap[] = [];
  const links: LinkEvent[] = [];
  let info: LiveStreamInfo | null = null;
  let calibration = options.calibration;
  let fit: Extract<EllipseFitResult, { ok: true }> | null = null;
  let pipeline: Pipeline | null = null;
  let totalSamples = Number.POSITIVE_INFINITY;
  let linkGapPending = false;
  let arrivalMs = 0;

  // Samples of the current chunk, and (while fitting) every sample held back so far.
  const chunk = createSampleStore(4096);
  const held = createSampleStore(options.calibration === null ? fitSamples : 1);
  let nextFitAt = fitSamples;
  let fitAttempts = 0;
  let output = allocateOutput(4096);
  const events: AlarmEvent[] = [];

  function allocateOutput(capacity: number) {
    return {
      positionM: new Float64Array(capacity),
      velocityMS: new Float64Array(capacity),
      level: new Float32Array(capacity),
      flags: new Uint8Array(capacity),
    };
  }

  function notify(notice: LiveNotice): void {
    for (const sink of sinks) sink.notice?.(notice);
  }

  function establish(channelCount: number, frameRateHz: number): void {
    if (info !== null) {
      if (frameRateHz === frameRateHz && frameRateHz !== info.rateHz && info.rateSource === 'frames') {
        throw new Error(`the sample rate in the frames changed from ${info.rateHz} Hz to ${frameRateHz} Hz at sample ${status.nextSampleIndex}; restart listen`);
      }
      if (frameRateHz === frameRateHz && frameRateHz !== info.rateHz) {
        throw new Error(`the frames say ${frameRateHz} Hz but --rate-hz says ${info.rateHz} Hz; give the device's true rate or leave --rate-hz out`);
      }
      if (channelCount <= 2 * axis + 1) throw new Error(`a frame has ${channelCount} channels: axis ${axis} needs at least ${2 * axis + 2}`);
      return;
    }
    if (channelCount <= 2 * axis + 1) throw new Error(`the frames have ${channelCount} channels: axis ${axis} needs at least ${2 * axis + 2}`);
    let rateHz: number;
    let rateSource: LiveStreamInfo['rateSource'];
    if (frameRateHz === frameRateHz) {
      if (!(frameRateHz >= 1)) throw new Error(`the frames state a sample rate of ${frameRateHz} Hz (must be at least 1)`);
      if (rateOption !== undefined && rateOption !== frameRateHz) {
        throw new Error(`the frames say ${frameRateHz} Hz but --rate-hz says ${rateOption} Hz; give the device's true rate or leave --rate-hz out`);
      }
      rateHz = frameRateHz;
      rateSource = 'frames';
    } else if (rateOption !== undefined) {
      rateHz = rateOption;
      rateSource = 'option';
    } else {
      throw new Error('the frames carry no sample rate field: give --rate-hz');
    }
    info = { rateHz, rateSource, channelCount, axis };
    status.rateHz = rateHz;
    if (durationS !== undefined) totalSamples = Math.max(1, Math.round(durationS * rateHz));
    if (calibration !== null) pipeline = makePipeline(calibration);
  }

  function makePipeline(correction: EllipseCalibration): Pipeline {
    return createPipeline({
      rateHz: info!.rateHz,
      wavelengthM: settings.wavelengthM,
      fold: settings.fold,
      refractiveIndex: settings.refractiveIndex,
      lengthScale: settings.lengthScale,
      bandwidthHz: settings.bandwidthHz,
      unwrap: settings.unwrap,
      calibration: correction,
      adc: { kind: 'int16' },
    });
  }

  function appendSamples(block: SampleBlock): void {
    const n = block.samplesPerFrame;
    chunk.reserve(n);
    const { samples, channelCount } = block;
    const x = chunk.x;
    const y = chunk.y;
    let at = 2 * axis;
    let to = chunk.length;
    for (let s = 0; s < n; s++) {
      x[to] = samples[at]!;
      y[to] = samples[at + 1]!;
      at += channelCount;
      to++;
    }
    chunk.length = to;
  }

  function onSamples(block: SampleBlock): void {
    establish(block.channelCount, block.sampleRateHz);
    if (linkGapPending) {
      // The outage lost bytes but the counter shows no jump (or text mode has none): at least one sample is gone.
      linkGapPending = false;
      chunk.marks.push({ at: chunk.length, lost: 1, cause: 'link' });
    }
    appendSamples(block);
  }

  function onGap(gap: InputGap): void {
    if (gap.kind === 'resync') chunk.marks.push({ at: chunk.length, lost: 1, cause: 'resync' });
    else chunk.marks.push({ at: chunk.length, lost: gap.lostSamples, cause: linkGapPending ? 'link' : 'sequence' });
    linkGapPending = false;
  }

  function onLink(event: LinkEvent): void {
    if (links.length < MAX_LINK_RECORDS) links.push(event);
    if (event.state === 'down') {
      if (status.link === 'up') status.linkDowns++;
      status.link = 'down';
      // A half-received frame is dropped (its frame shows up as a sequence gap). A half-received text line gets
      // a byte no line may hold, so the line it continues into after the outage is rejected as malformed
      // instead of joining two halves into a wrong sample.
      if (wire !== null) wire.flushPartial();
      else text!.push(SPOIL_LINE);
    } else {
      if (event.gap) {
        status.linkReturns++;
        linkGapPending = true;
      }
      status.link = 'up';
    }
    notify({ kind: 'link', event });
  }

  /** Cuts the chunk so that the absolute index stops at totalSamples; true when the end is reached. */
  function truncateChunk(): boolean {
    let index = status.nextSampleIndex;
    let previous = 0;
    for (let m = 0; m <= chunk.marks.length; m++) {
      const mark = chunk.marks[m];
      const segmentEnd = mark === undefined ? chunk.length : mark.at;
      const segment = segmentEnd - previous;
      if (index + segment >= totalSamples) {
        chunk.length = previous + (totalSamples - index);
        chunk.marks.length = m;
        return true;
      }
      index += segment;
      if (mark !== undefined) {
        if (index + mark.lost >= totalSamples) {
          chunk.length = mark.at;
          chunk.marks.length = m;
          return true;
        }
        index += mark.lost;
      }
      previous = segmentEnd;
    }
    return false;
  }

  function recordGap(mark: GapMark, sampleIndex: number): void {
    status.gaps++;
    status.lostSamples += mark.lost;
    const gap: LiveGap = { sampleIndex, lostSamples: mark.lost, cause: mark.cause };
    if (gaps.length < MAX_GAP_RECORDS) gaps.push(gap);
    notify({ kind: 'gap', gap });
  }

  /** Runs the pipeline over store[0, length) with its gap marks, one block per piece, awaiting the sinks. */
  async function processStore(store: SampleStore): Promise<void> {
    const p = pipeline!;
    // Output as large as the chunk store, so that a chunk without gaps is one pipeline call and one block.
    if (output.flags.length < chunk.x.length) output = allocateOutput(chunk.x.length);
    const capacity = output.flags.length;
    let start = 0;
    let m = 0;
    const marks = store.marks;
    while (start < store.length || m < marks.length) {
      let gapBefore = 0;
      while (m < marks.length && marks[m]!.at === start) {
        p.markGap(marks[m]!.lost);
        gapBefore += marks[m]!.lost;
        m++;
      }
      if (start >= store.length) break;
      const end = Math.min(store.length, start + capacity, m < marks.length ? marks[m]!.at : store.length);
      const n = end - start;
      // Views cost an allocation; they are needed only after a gap or for the held samples.
      const x = start === 0 ? store.x : store.x.subarray(start, end);
      const y = start === 0 ? store.y : store.y.subarray(start, end);
      const firstIndex = p.nextSampleIndex;
      events.length = 0;
      p.process(x, y, n, output, events);
      for (const event of events) if (event.state === 'raised') status.alarmsRaised[event.kind]++;
      status.samplesProcessed += n;
      status.positionM = output.positionM[n - 1]!;
      status.velocityMS = output.velocityMS[n - 1]!;
      status.level = output.level[n - 1]!;
      status.flags = output.flags[n - 1]!;
      status.countLost = p.countLost;
      const block: LiveBlock = { firstIndex, length: n, x, y, gapBefore, rateHz: info!.rateHz, ...output, events, arrivalMs };
      for (const sink of sinks) {
        const pending = sink.block?.(block);
        if (pending !== undefined) await pending;
      }
      start = end;
    }
  }

  /** Gap bookkeeping for the chunk's marks, in absolute indices, as they enter the stream. */
  function accountChunk(): void {
    let index = status.nextSampleIndex;
    let previous = 0;
    for (const mark of chunk.marks) {
      index += mark.at - previous;
      recordGap(mark, index + mark.lost);
      index += mark.lost;
      previous = mark.at;
    }
    index += chunk.length - previous;
    status.nextSampleIndex = index;
    status.samplesDelivered += chunk.length;
  }

  function solveFit(): EllipseFitResult {
    const fit = createTwoPassFit();
    for (;;) {
      fit.add(held.x, held.y, held.length);
      const result = fit.endPass();
      if (result !== null) return result;
    }
  }

  /** Tries the live fit; on success the held samples go through the pipeline. `final`: no more samples will come. */
  async function tryFit(final: boolean): Promise<void> {
    fitAttempts++;
    const result = solveFit();
    const givingUp = !result.ok && (final || fitAttempts >= MAX_FIT_ATTEMPTS);
    notify({ kind: 'fit', fit: result, heldSamples: held.length, final: result.ok || givingUp });
    if (!result.ok) {
      if (givingUp) {
        throw new Error(
          `cannot fit the correction to the first ${held.length} samples (${result.message}); ` +
            'move the stage over at least one fringe while listen starts, raise --fit-samples, or give --calibration',
        );
      }
      nextFitAt += fitSamples;
      return;
    }
    fit = result;
    calibration = result.calibration;
    status.calibration = 'fitted';
    pipeline = makePipeline(result.calibration);
    await processStore(held);
    held.clear();
  }

  async function deliverChunk(): Promise<void> {
    accountChunk();
    for (const sink of sinks) {
      const pending = sink.raw?.(chunk.x, chunk.y, chunk.length, status.samplesDelivered - chunk.length);
      if (pending !== undefined) await pending;
    }
    if (pipeline !== null) {
      await processStore(chunk);
      return;
    }
    held.reserve(chunk.length);
    held.x.set(chunk.x.subarray(0, chunk.length), held.length);
    held.y.set(chunk.y.subarray(0, chunk.length), held.length);
    for (const mark of chunk.marks) held.marks.push({ at: held.length + mark.at, lost: mark.lost, cause: mark.cause });
    held.length += chunk.length;
    if (held.length >= nextFitAt) await tryFit(false);
  }

  async function runLoop(): Promise<LiveSummary> {
    const queue = queueObservable<ByteSourceEvent>(options.source.open());
    let stopReason: LiveSummary['stopReason'] = 'source ended';
    const onAbort = () => {
      stopReason = 'signal';
      queue.stop();
    };
    if (options.signal?.aborted) onAbort();
    else options.signal?.addEventListener('abort', onAbort, { once: true });
    let started = false;
    try {
      for (;;) {
        const event = await queue.next();
        if (event === null) break;
        if (isLinkEvent(event)) {
          onLink(event);
          continue;
        }
        arrivalMs = performance.now();
        chunk.clear();
        if (wire !== null) wire.push(event);
        else text!.push(event);
        if (chunk.length === 0) continue;
        const reachedEnd = truncateChunk();
        if (!started) {
          started = true;
          for (const sink of sinks) {
            const pending = sink.start?.(info!);
            if (pending !== undefined) await pending;
          }
        }
        if (chunk.length > 0 || chunk.marks.length > 0) await deliverChunk();
        if (reachedEnd) {
          stopReason = 'duration';
          break;
        }
      }
      if (pipeline === null && held.length > 0) await tryFit(true);
    } finally {
      options.signal?.removeEventListener('abort', onAbort);
      queue.stop();
    }
    // Assigned inside the callbacks above, which the compiler's narrowing does not follow.
    const finalPipeline = pipeline as Pipeline | null;
    if (finalPipeline !== null) status.countLost = finalPipeline.countLost;
    return { stopReason, status, info, calibration, fit, gaps, links };
  }

  return { status, done: runLoop() };
}
