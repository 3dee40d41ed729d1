// Byte source events → gap-aware sample blocks: the wire (or text line) decoder plus the rules a live link needs
// on top of it. A sequence jump is a gap of the frames it skipped; a link outage is a gap of at least one
// sample (the bytes in flight are gone even when the counter shows no jump); a text line cut by an outage is
// spoiled so that its two halves never join into one wrong sample; a counter that restarts is a gap of unknown
// length. Every sample index counts lost samples. Edges of the frames' digital inputs go with the blocks.

import { integerInRange, oneOf, OptionError, positiveFinite } from '../../core/index.js';
import { createRecentViews } from '../../core/recent-views.js';
import type { FrameBlock } from '../../stream/index.js';
import type { ByteSourceEvent, LinkEvent } from '../serial/index.js';
import {
  axisOutputsOf,
  createLineDecoder,
  createWireDecoder,
  WIRE_MAX_CHANNELS,
  WIRE_MAX_SAMPLES_PER_FRAME,
  type InputGap,
  type LineDecoder,
  type LineDecoderCounters,
  type SampleBlock,
  type WireDecoder,
  type WireDecoderCounters,
} from '../wire/index.js';

export interface LinkReaderOptions {
  /** `binary`: wire frames (docs/wire-format.md); `text`: `x,y[,…]` lines, no sequence counter. Default `binary`. */
  readonly mode?: 'binary' | 'text';
  /** Binary: largest samples per frame accepted, 1..4096. Default 4096, the format's maximum. */
  readonly maxSamplesPerFrame?: number;
  /** Text: integers per line, even 2..16. Default 2. */
  readonly channelCount?: number;
  /**
   * Sample rate, Hz. Default: the frames' rate field. Required in text mode and for frames without the field;
   * when both are given they must agree.
   */
  readonly rateHz?: number;
  /** Called with every block of samples, in order (reused object and array: read inside the call). */
  readonly onBlock: (block: LinkBlock) => void;
  /** Called for every gap, before the block that follows it. */
  readonly onGap?: (gap: LinkGap) => void;
  /** Called for every repeated frame dropped (binary mode): no samples lost, none delivered twice. */
  readonly onDuplicate?: (duplicate: LinkDuplicate) => void;
  /** Called for every link change the source reports, after the reader applied it. */
  readonly onLink?: (event: LinkEvent) => void;
}

/**
 * Interleaved int16 samples of every channel, contiguous in sample index: one block per chunk of bytes, cut
 * where a gap or a change of channel count falls. The object and `samples` are reused.
 */
export interface LinkBlock extends FrameBlock {
  readonly kind: 'samples';
  readonly samples: Int16Array;
  readonly channelCount: number;
  /** Detector outputs of each axis (2 each unless the frames carry a channel layout, wire format version 3). */
  readonly axisOutputs: readonly number[];
  /** Samples per channel in this block. */
  readonly samplesPerFrame: number;
  /** Samples lost just before this block (0: none). */
  readonly gapBefore: number;
  /** Absolute index of the first sample: samples delivered plus samples lost, from the first sample received. */
  readonly sampleIndex: number;
  readonly rateHz: number;
  /** Edges of the digital inputs within this block (version 2 frames, docs/wire-format.md); 0 when none. */
  readonly edgeCount: number;
  /**
   * Edge times as fractional absolute sample indices: the edge lies between sample ⌈t⌉ − 1 and sample ⌈t⌉,
   * ⌈t⌉ being in this block. First `edgeCount` used; reused like `samples`.
   */
  readonly edgeTime: Float64Array;
  /** Input line of each edge: 0 trigger, 1 reference mark, 2..7 further trigger inputs. */
  readonly edgeLine: Uint8Array;
  /** 1 rising, 0 falling. */
  readonly edgeRising: Uint8Array;
}

export interface LinkGap {
  readonly kind: 'gap';
  /** Absolute index of the first sample after the gap (lost samples counted). */
  readonly sampleIndex: number;
  /** Samples lost; for a `resync` the true number is unknown and 1, the least, is marked. */
  readonly lostSamples: number;
  /**
   * `sequence`: the frame counter jumped; `link`: across a link outage (at least 1, more when the counter says
   * so); `resync`: the counter restarted or went backwards (a gap of unknown length, docs/wire-format.md).
   */
  readonly cause: 'sequence' | 'link' | 'resync';
}

/** A repeated frame, dropped: it changes neither the samples nor their indices, but the link repeated itself. */
export interface LinkDuplicate {
  readonly kind: 'duplicate';
  /** Absolute index of the next sample to come when the repeat arrived. */
  readonly sampleIndex: number;
  /** The repeated frame's sequence number. */
  readonly sequence: number;
}

export interface LinkReaderStatus {
  link: 'waiting' | 'up' | 'down';
  /** Outages (up → down). */
  linkDowns: number;
  /** Returns after an outage. */
  linkReturns: number;
  /** NaN until the first samples. */
  rateHz: number;
  /** Where the rate came from; null until the first samples. */
  rateSource: 'frames' | 'option' | null;
  /** Channels of the latest block; 0 until the first samples. */
  channelCount: number;
  /** Detector outputs of each axis of the latest block (2 each unless the frames carry a channel layout); empty until the first samples. */
  axisOutputs: readonly number[];
  samplesDelivered: number;
  /** Next absolute index: delivered plus lost. */
  nextSampleIndex: number;
  gaps: number;
  /** Samples counted lost (a resync adds its marked 1). */
  lostSamples: number;
  /** Of gaps: counter restarts, whose length is unknown. */
  resyncs: number;
  /** Repeated frames dropped. */
  duplicates: number;
  readonly wire: Readonly<WireDecoderCounters> | null;
  readonly text: Readonly<LineDecoderCounters> | null;
}

export interface LinkReader {
  /** Live counters; read them, do not write them. */
  readonly status: Readonly<LinkReaderStatus>;
  /**
   * Takes one event of a byte source. Throws (an Error naming the rule) when the frames contradict the options
   * or themselves: a rate that differs from `rateHz` or changes, frames without a rate and no `rateHz`.
   */
  push(event: ByteSourceEvent): void;
  /** Back to the state after creation. */
  reset(): void;
}

/** Byte that spoils a half-received text line at an outage: no line may hold it, so the line is rejected. */
const SPOIL_LINE = Uint8Array.of(0x23);

export function createLinkReader(options: LinkReaderOptions): LinkReader {
  const mode = oneOf('mode', options.mode ?? 'binary', ['binary', 'text'] as const);
  const rateOption = options.rateHz === undefined ? undefined : positiveFinite('rateHz', options.rateHz);
  if (mode === 'text' && rateOption === undefined) throw new OptionError('rateHz', 'given in text mode (lines carry no sample rate)', undefined);
  const maxSamplesPerFrame = integerInRange('maxSamplesPerFrame', options.maxSamplesPerFrame ?? WIRE_MAX_SAMPLES_PER_FRAME, 1, WIRE_MAX_SAMPLES_PER_FRAME);
  const textChannels = integerInRange('channelCount', options.channelCount ?? 2, 2, WIRE_MAX_CHANNELS);
  if (textChannels % 2 !== 0) throw new OptionError('channelCount', 'even', textChannels);
  if (typeof options.onBlock !== 'function') throw new OptionError('onBlock', 'a function', typeof options.onBlock);
  const { onBlock, onGap, onLink, onDuplicate } = options;

  // The decoders' callbacks run only inside push(), after everything below is initialised.
  const wire: WireDecoder | null = mode === 'binary' ? createWireDecoder({ maxSamplesPerFrame, onFrame: onSamples, onGap: onSequenceGap, onDuplicate: onRepeat }) : null;
  const text: LineDecoder | null = mode === 'text' ? createLineDecoder({ channelCount: textChannels, maxSamplesPerBlock: 1024, onBlock: onSamples }) : null;
  const status: LinkReaderStatus = {
    link: 'waiting',
    linkDowns: 0,
    linkReturns: 0,
    rateHz: Number.NaN,
    rateSource: null,
    channelCount: 0,
    axisOutputs: [],
    samplesDelivered: 0,
    nextSampleIndex: 0,
    gaps: 0,
    lostSamples: 0,
    resyncs: 0,
    duplicates: 0,
    wire: wire === null ? null : wire.counters,
    text: text === null ? null : text.counters,
  };

  // The block being gathered from the current chunk.
  let buffer = new Int16Array(4096);
  let length = 0;
  let channels = 0;
  let layout = 0;
  let pendingGap = 0;
  let linkGapPending = false;
  // Views of the buffer, kept for the last two block lengths (a chunk holds n or n + 1 frames); dropped when it grows.
  const views = createRecentViews((values) => buffer.subarray(0, values));
  const block = {
    kind: 'samples' as const,
    samples: buffer.subarray(0, 0),
    channelCount: 0,
    axisOutputs: [] as readonly number[],
    samplesPerFrame: 0,
    gapBefore: 0,
    sampleIndex: 0,
    rateHz: Number.NaN,
    edgeCount: 0,
    edgeTime: new Float64Array(16),
    edgeLine: new Uint8Array(16),
    edgeRising: new Uint8Array(16),
  };

  /** The rate from the frame's field (NaN when it has none) or the option. Takes the block: a number passed on cost a heap number a frame. */
  function establishRate(decoded: SampleBlock): void {
    const frameRateHz = decoded.sampleRateHz;
    const known = status.rateSource !== null;
    if (frameRateHz === frameRateHz) {
      if (known && frameRateHz !== status.rateHz) {
        throw new Error(
          status.rateSource === 'frames'
            ? `the sample rate in the frames changed from ${status.rateHz} Hz to ${frameRateHz} Hz at sample ${status.nextSampleIndex}`
            : `the frames say ${frameRateHz} Hz but rateHz is ${status.rateHz} Hz; give the device's true rate or leave it out`,
        );
      }
      if (known) return;
      if (!(frameRateHz >= 1)) throw new Error(`the frames state a sample rate of ${frameRateHz} Hz (must be at least 1)`);
      if (rateOption !== undefined && rateOption !== frameRateHz) {
        throw new Error(`the frames say ${frameRateHz} Hz but rateHz is ${rateOption} Hz; give the device's true rate or leave it out`);
      }
      status.rateHz = frameRateHz;
      status.rateSource = 'frames';
    } else if (!known) {
      if (rateOption === undefined) throw new Error('the frames carry no sample rate field: give rateHz');
      status.rateHz = rateOption;
      status.rateSource = 'option';
    }
  }

  /** Hands out the samples gathered so far as one block. */
  function flush(): void {
    if (length === 0) return;
    const n = length / channels;
    block.samples = views.get(length);
    block.channelCount = channels;
    block.axisOutputs = status.axisOutputs;
    block.samplesPerFrame = n;
    block.gapBefore = pendingGap;
    block.sampleIndex = status.nextSampleIndex;
    block.rateHz = status.rateHz;
    status.nextSampleIndex += n;
    status.samplesDelivered += n;
    length = 0;
    pendingGap = 0;
    onBlock(block);
    block.edgeCount = 0;
  }

  /** Appends the decoded block's edges, in absolute sample time (its first sample will be at `firstIndex`). */
  /** The frame's edges, its first sample `offset` samples into the block. */
  function appendEdges(decoded: SampleBlock, offset: number): void {
    const count = decoded.edgeCount;
    if (count === 0) return;
    // Added here, not by the caller: past 2^31 samples the index is a double, and a double passed on cost a heap
    // number a frame.
    const firstIndex = status.nextSampleIndex + offset;
    if (block.edgeCount + count > block.edgeTime.length) {
      const capacity = 2 * (block.edgeCount + count);
      const time = new Float64Array(capacity);
      const line = new Uint8Array(capacity);
      const rising = new Uint8Array(capacity);
      time.set(block.edgeTime.subarray(0, block.edgeCount));
      line.set(block.edgeLine.subarray(0, block.edgeCount));
      rising.set(block.edgeRising.subarray(0, block.edgeCount));
      Object.assign(block, { edgeTime: time, edgeLine: line, edgeRising: rising });
    }
    for (let e = 0; e < count; e++) {
      block.edgeTime[block.edgeCount] = firstIndex + decoded.edgeTime[e]!;
      block.edgeLine[block.edgeCount] = decoded.edgeLine[e]!;
      block.edgeRising[block.edgeCount] = decoded.edgeRising[e]!;
      block.edgeCount++;
    }
  }

  function gap(lostSamples: number, cause: LinkGap['cause']): void {
    flush();
    status.gaps++;
    status.lostSamples += lostSamples;
    status.nextSampleIndex += lostSamples;
    pendingGap += lostSamples;
    onGap?.({ kind: 'gap', sampleIndex: status.nextSampleIndex, lostSamples, cause });
  }

  function onSamples(decoded: SampleBlock): void {
    establishRate(decoded);
    if (linkGapPending) {
      // The outage lost bytes but the counter shows no jump (or text has none): at least one sample is gone.
      linkGapPending = false;
      gap(1, 'link');
    }
    if (decoded.channelCount !== channels || decoded.channelLayout !== layout) {
      flush();
      channels = decoded.channelCount;
      layout = decoded.channelLayout;
      status.channelCount = channels;
      // The decoder let only valid layouts through.
      status.axisOutputs = Object.freeze(axisOutputsOf(channels, layout)!);
    }
    const values = decoded.samplesPerFrame * channels;
    if (length + values > buffer.length) {
      let capacity = buffer.length;
      while (capacity < length + values) capacity *= 2;
      const grown = new Int16Array(capacity);
      grown.set(buffer.subarray(0, length));
      buffer = grown;
      views.clear();
    }
    appendEdges(decoded, length / channels);
    // The decoder's view is the frame's values exactly (a new view only when the frame size changes).
    buffer.set(decoded.samples.length === values ? decoded.samples : decoded.samples.subarray(0, values), length);
    length += values;
  }

  function onSequenceGap(decoded: InputGap): void {
    const cause = decoded.kind === 'resync' ? 'resync' : linkGapPending ? 'link' : 'sequence';
    linkGapPending = false;
    if (cause === 'resync') status.resyncs++;
    // A resync's length is unknown: the least, 1 sample, latches count lost and keeps indices moving.
    gap(cause === 'resync' ? 1 : decoded.lostSamples, cause);
  }

  function onRepeat(sequence: number): void {
    status.duplicates++;
    // The samples gathered from this chunk are not handed out yet: they come before the repeat.
    onDuplicate?.({ kind: 'duplicate', sampleIndex: status.nextSampleIndex + (channels > 0 ? length / channels : 0), sequence });
  }

  function applyLink(event: LinkEvent): void {
    if (event.state === 'down') {
      if (status.link === 'up') status.linkDowns++;
      status.link = 'down';
      // A half-received frame is dropped (it shows up as a sequence gap); a half-received line is spoiled.
      if (wire !== null) wire.flushPartial();
      else text!.push(SPOIL_LINE);
    } else {
      if (event.gap) {
        status.linkReturns++;
        linkGapPending = true;
      }
      status.link = 'up';
    }
  }

  return {
    status,
    push(event) {
      if (event instanceof Uint8Array) {
        if (wire !== null) wire.push(event);
        else text!.push(event);
        flush();
        return;
      }
      applyLink(event);
      onLink?.(event);
    },
    reset() {
      wire?.reset();
      text?.reset();
      length = 0;
      channels = 0;
      layout = 0;
      pendingGap = 0;
      linkGapPending = false;
      Object.assign(status, {
        link: 'waiting',
        linkDowns: 0,
        linkReturns: 0,
        rateHz: Number.NaN,
        rateSource: null,
        channelCount: 0,
        axisOutputs: [],
        samplesDelivered: 0,
        nextSampleIndex: 0,
        gaps: 0,
        lostSamples: 0,
        resyncs: 0,
        duplicates: 0,
      });
      block.edgeCount = 0;
    },
  };
}
