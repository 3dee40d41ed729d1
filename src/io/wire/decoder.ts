// Incremental decoder for the fringetally wire frame, versions 1 to 3 (docs/wire-format.md): byte chunks in,
// sample blocks out. Keeps partial frames across chunks, hunts for the sync marker after garbage, drops frames
// failing CRC-32C, drops repeated frames, and tells counted losses from counter restarts. Never throws on bad
// bytes; its byte area is sized once for the largest allowed frame, nothing is allocated per frame in steady state.

import { createWireCrcKernel, type WireCrcKernel } from '../../accel/wire-crc.js';
import { integerInRange, OptionError } from '../../core/options.js';
import type { InputGap, SampleBlock } from './block.js';
import { crc32c, crc32cWords } from './crc32c.js';
import {
  WIRE_CRC_BYTES,
  WIRE_EDGE_BYTES,
  WIRE_EDGE_LEAD_UNITS,
  WIRE_FIXED_HEADER_BYTES,
  WIRE_MAX_CHANNELS,
  WIRE_MAX_EDGE_LINE,
  WIRE_MAX_EDGES_PER_FRAME,
  WIRE_MAX_SAMPLES_PER_FRAME,
  WIRE_SAMPLE_COUNTER_MODULUS,
  WIRE_SEQUENCE_MODULUS,
  WIRE_SYNC_0,
  WIRE_SYNC_1,
  WIRE_VERSION,
  WIRE_VERSION_2,
  WIRE_VERSION_3,
  WireEdgePolarity,
  WireFlag,
  WireSampleFormat,
  axisOutputsOf,
  readU32,
  wireFlagsKnown,
  wireHeaderLength,
  wireMaxFrameLength,
} from './format.js';

export interface WireDecoderOptions {
  /** Largest channel count accepted; 2..16. Default 16. Frames with more are rejected (`oversizeHeaders`). */
  readonly maxChannels?: number;
  /**
   * Largest samples per frame accepted; 1..4096. Default 4096, the format's maximum. Sets the buffer size with
   * maxChannels; frames with more are rejected and counted in `oversizeHeaders`.
   */
  readonly maxSamplesPerFrame?: number;
  /** Called once per good frame with a reused block (valid only during the call). */
  readonly onFrame: (block: SampleBlock) => void;
  /** Called before the frame that follows a counted loss or a counter restart; the pipeline turns it into an input-gap event. */
  readonly onGap: (gap: InputGap) => void;
  /** Called for every repeated frame dropped (counted in `duplicates`), with its sequence number. */
  readonly onDuplicate?: (sequence: number) => void;
}

export interface WireDecoderConfig {
  readonly maxChannels: number;
  readonly maxSamplesPerFrame: number;
  /** Bytes of the internal buffer: the largest frame the limits allow. */
  readonly bufferBytes: number;
}

/** Running totals since creation or reset. */
export interface WireDecoderCounters {
  bytesIn: number;
  /** Frames delivered through onFrame. */
  framesGood: number;
  /** Candidate frames with a valid header whose CRC did not match. */
  crcFailures: number;
  /** Sync markers followed by an impossible header (version, format, channels, flags, size). */
  headerRejects: number;
  /**
   * Of headerRejects: headers the format allows but the configured limits do not (more channels than
   * maxChannels or more samples than maxSamplesPerFrame). Nonzero means the limits are probably too low.
   */
  oversizeHeaders: number;
  /** Largest samples per frame announced by an oversize header; 0 when none. */
  oversizeSamplesPerFrame: number;
  /** Largest channel count announced by an oversize header; 0 when none. */
  oversizeChannels: number;
  /** Times the decoder lost sync and had to hunt for the marker (a start in mid-frame counts once). */
  resyncs: number;
  /** Counted losses and counter restarts reported through onGap. */
  gaps: number;
  /** Of gaps: counter restarts (kind `resync`), whose length is unknown. */
  sequenceResyncs: number;
  /** Sum of InputGap.lostSamples over the counted losses. */
  lostSamples: number;
  /** Frames dropped because they repeat one of the last 16 frames (same sequence and CRC). */
  duplicates: number;
  /** Edge records dropped from good frames for a sample, line or polarity out of range. */
  edgeRejects: number;
  /** Bytes discarded while hunting or by flushPartial. */
  bytesSkipped: number;
}

export interface WireDecoder {
  readonly config: WireDecoderConfig;
  /** Live totals; read them, do not write them. */
  readonly counters: Readonly<WireDecoderCounters>;
  /** Feeds one chunk of any length (0 included); returns the frames delivered from it. */
  push(chunk: Uint8Array): number;
  /**
   * Drops the bytes of an unfinished frame (call it when the link went down) and returns how many.
   * The sequence expectation is kept, so the first frame after reconnection reports the frames missed.
   */
  flushPartial(): number;
  /** Back to the state after creation: empty buffer, no sequence expectation, counters zero. */
  reset(): void;
}

/** Frames remembered for the duplicate check. */
const RECENT_FRAMES = 16;
/**
 * Serial-number arithmetic (RFC 1982, section 3.2): a counter value less than half the range ahead of the
 * expected one is later than it; half the range or more is taken as behind it, i.e. a restart.
 */
const HALF_SEQUENCE = WIRE_SEQUENCE_MODULUS / 2;
const HALF_SAMPLE_COUNTER = WIRE_SAMPLE_COUNTER_MODULUS / 2;
/** True where an Int16Array reads little-endian, the wire's byte order: sample bytes then copy as they are. */
const LITTLE_ENDIAN_HOST = new Uint8Array(Uint16Array.of(1).buffer)[0] === 1;
/** Most bytes of a chunk taken in at once; a longer chunk goes in parts (the area holds an unfinished frame besides). */
const PART_BYTES = 65_536;

export function createWireDecoder(options: WireDecoderOptions): WireDecoder {
  return createWireDecoderWith(options, createWireCrcKernel);
}

/**
 * The decoder over the bytes and CRC of `crcKernel(bytes)` (createWireDecoder: the WebAssembly one), or over bytes
 * of its own and the JavaScript CRC when that gives null. Same frames, gaps and counters either way; tests compare
 * the two.
 */
export function createWireDecoderWith(options: WireDecoderOptions, crcKernel: (byteCapacity: number) => WireCrcKernel | null): WireDecoder {
  const maxChannels = integerInRange('maxChannels', options.maxChannels ?? WIRE_MAX_CHANNELS, 2, WIRE_MAX_CHANNELS);
  const maxSamplesPerFrame = integerInRange(
    'maxSamplesPerFrame',
    options.maxSamplesPerFrame ?? WIRE_MAX_SAMPLES_PER_FRAME,
    1,
    WIRE_MAX_SAMPLES_PER_FRAME,
  );
  if (typeof options.onFrame !== 'function') throw new OptionError('onFrame', 'a function', options.onFrame);
  if (typeof options.onGap !== 'function') throw new OptionError('onGap', 'a function', options.onGap);
  const { onFrame, onGap, onDuplicate } = options;
  const bufferBytes = wireMaxFrameLength(maxChannels, maxSamplesPerFrame);
  const config: WireDecoderConfig = Object.freeze({ maxChannels, maxSamplesPerFrame, bufferBytes });

  // One byte area: the sample store, then the work bytes (an unfinished frame, then the chunk's bytes after it),
  // parsed there whatever the chunking; the samples are a byte copy within it (on a little-endian host).
  const storeBytes = Math.ceil((maxChannels * maxSamplesPerFrame * 2) / 8) * 8;
  const workAt = storeBytes;
  const workBytes = bufferBytes + PART_BYTES;
  const kernel = crcKernel(storeBytes + workBytes);
  const area = kernel === null ? new Uint8Array(storeBytes + workBytes) : kernel.bytes;
  // The area's bytes as int32 from its buffer's start (crc32cWords' indexing), for the JavaScript CRC.
  const areaQuads = LITTLE_ENDIAN_HOST && kernel === null ? new Int32Array(area.buffer, 0, (area.byteOffset + area.length) >> 2) : null;
  const sampleStore = new Int16Array(area.buffer, area.byteOffset, storeBytes >> 1);
  const counters: WireDecoderCounters = {
    bytesIn: 0,
    framesGood: 0,
    crcFailures: 0,
    headerRejects: 0,
    oversizeHeaders: 0,
    oversizeSamplesPerFrame: 0,
    oversizeChannels: 0,
    resyncs: 0,
    gaps: 0,
    sequenceResyncs: 0,
    lostSamples: 0,
    duplicates: 0,
    edgeRejects: 0,
    bytesSkipped: 0,
  };
  const block = {
    samples: sampleStore.subarray(0, 0),
    channelCount: 0,
    channelLayout: 0,
    axisOutputs: undefined as readonly number[] | undefined,
    samplesPerFrame: 0,
    sequence: 0,
    sampleIndex: 0,
    sampleRateHz: Number.NaN,
    timestampUs: Number.NaN,
    sampleCounter: Number.NaN,
    edgeCount: 0,
    edgeTime: new Float64Array(WIRE_MAX_EDGES_PER_FRAME),
    edgeLine: new Uint8Array(WIRE_MAX_EDGES_PER_FRAME),
    edgeRising: new Uint8Array(WIRE_MAX_EDGES_PER_FRAME),
  };
  // The last frames' sequence numbers and CRCs, for the duplicate check (a ring, newest at recentAt − 1). The CRCs
  // as int32 (the same 32 bits): half of all CRCs lie beyond the small integers, and a number there passed on
  // cost a heap number per frame.
  const recentSequence = new Int32Array(RECENT_FRAMES);
  const recentCrc = new Int32Array(RECENT_FRAMES);
  let recentAt = 0;

  let filled = 0;
  /** Frames delivered during the current push. */
  let framesInPush = 0;
  let inSync = true;
  // What the next frame should carry (sequence; sample counter, −1 when the last frame carried none) and the index
  // of its first sample. Fields, not variables: a device's counter beyond 2^31, or indices after a few minutes at
  // MHz rates, are doubles, and a double stored in a closure's variable costs a heap number each frame.
  const expected = { sequence: -1, counter: -1, sampleIndex: 0 };

  function skip(count: number): void {
    if (count === 0) return;
    if (inSync) {
      counters.resyncs++;
      inSync = false;
    }
    counters.bytesSkipped += count;
  }

  /**
   * Header at `p` of `bytes`, with `available` bytes from p (at least 10) → frame length; 0 when the header is
   * impossible; −1 when more bytes are needed to tell (the optional fields of a version 2 header).
   */
  function frameLengthAt(bytes: Uint8Array, p: number, available: number): number {
    const version = bytes[p + 2]!;
    if ((version !== WIRE_VERSION && version !== WIRE_VERSION_2 && version !== WIRE_VERSION_3) || bytes[p + 3] !== WireSampleFormat.int16le) return 0;
    const channels = bytes[p + 4]!;
    const flags = bytes[p + 5]!;
    const samplesPerFrame = bytes[p + 8]! | (bytes[p + 9]! << 8);
    const layout = (flags & WireFlag.channelLayout) !== 0;
    // Without a layout the channels are pairs; with one, the layout's sum (checked below).
    if (channels < 2 || channels > WIRE_MAX_CHANNELS || (!layout && channels % 2 !== 0)) return 0;
    if (!wireFlagsKnown(flags, version) || samplesPerFrame < 1 || samplesPerFrame > WIRE_MAX_SAMPLES_PER_FRAME) return 0;
    const headerLength = wireHeaderLength(flags);
    if (available < headerLength) return -1;
    // The layout is the last optional field, the edge count the one before it.
    const edgeCountAt = p + headerLength - (layout ? 4 : 0) - 2;
    let edgeCount = 0;
    if (flags & WireFlag.edges) {
      edgeCount = bytes[edgeCountAt]! | (bytes[edgeCountAt + 1]! << 8);
      if (edgeCount > WIRE_MAX_EDGES_PER_FRAME) return 0;
    }
    if (layout && axisOutputsOf(channels, readU32(bytes, p + headerLength - 4)) === null) return 0;
    if (channels > maxChannels || samplesPerFrame > maxSamplesPerFrame) {
      // Allowed by the format, refused by the limits: count it, so the caller can name the limit to raise.
      counters.oversizeHeaders++;
      if (samplesPerFrame > counters.oversizeSamplesPerFrame) counters.oversizeSamplesPerFrame = samplesPerFrame;
      if (channels > counters.oversizeChannels) counters.oversizeChannels = channels;
      return 0;
    }
    return headerLength + channels * samplesPerFrame * 2 + edgeCount * WIRE_EDGE_BYTES + WIRE_CRC_BYTES;
  }

  /** True when a frame with this sequence and CRC was among the last ones delivered. */
  function isRecent(sequence: number, crc: number): boolean {
    for (let i = 0; i < RECENT_FRAMES; i++) if (recentSequence[i] === sequence && recentCrc[i] === crc) return true;
    return false;
  }

  /**
   * Checks the frame's counters against the expectation; false when the frame is a repeat to drop. Its sample counter
   * is in `block.sampleCounter` already (NaN when absent); `crc` as int32.
   */
  function checkSequence(sequence: number, samplesPerFrame: number, crc: number): boolean {
    const counter = block.sampleCounter;
    const expectedSequence = expected.sequence;
    const counterJump = expected.counter >= 0 && counter === counter ? (counter - expected.counter + WIRE_SAMPLE_COUNTER_MODULUS) % WIRE_SAMPLE_COUNTER_MODULUS : -1;
    // The sample counter, when this frame and the one before carry it, decides alone: it counts exactly even
    // when frame sizes differ.
    if (expectedSequence >= 0 && (counterJump >= 0 ? counterJump !== 0 : sequence !== expectedSequence)) {
      if (isRecent(sequence, crc)) {
        counters.duplicates++;
        onDuplicate?.(sequence);
        return false;
      }
      const sequenceJump = (sequence - expectedSequence + WIRE_SEQUENCE_MODULUS) % WIRE_SEQUENCE_MODULUS;
      const resync = counterJump >= 0 ? counterJump >= HALF_SAMPLE_COUNTER : sequenceJump >= HALF_SEQUENCE;
      const lostFrames = resync ? Number.NaN : sequenceJump;
      const lostSamples = resync ? Number.NaN : counterJump >= 0 ? counterJump : sequenceJump * samplesPerFrame;
      counters.gaps++;
      if (resync) counters.sequenceResyncs++;
      else counters.lostSamples += lostSamples;
      // Indices count lost samples, as everywhere in the library; a resync's length is unknown, so it counts the
      // least, one sample (the link reader does the same).
      expected.sampleIndex += resync ? 1 : lostSamples;
      // Gaps are rare: a fresh record each time lets the consumer keep it.
      onGap({
        sampleIndex: expected.sampleIndex,
        kind: resync ? 'resync' : 'loss',
        lostFrames,
        lostSamples,
        expectedSequence,
        receivedSequence: sequence,
      });
    }
    expected.sequence = (sequence + 1) % WIRE_SEQUENCE_MODULUS;
    expected.counter = counter === counter ? (counter + samplesPerFrame) % WIRE_SAMPLE_COUNTER_MODULUS : -1;
    recentSequence[recentAt] = sequence;
    recentCrc[recentAt] = crc;
    recentAt = (recentAt + 1) % RECENT_FRAMES;
    return true;
  }

  /** Hands out the good frame at `p` of the area; false when it was a repeat and was dropped. */
  function deliver(p: number, length: number): boolean {
    const bytes = area;
    const channels = bytes[p + 4]!;
    const flags = bytes[p + 5]!;
    const sequence = bytes[p + 6]! | (bytes[p + 7]! << 8);
    const samplesPerFrame = bytes[p + 8]! | (bytes[p + 9]! << 8);
    let at = p + WIRE_FIXED_HEADER_BYTES;
    let sampleRateHz = Number.NaN;
    let timestampUs = Number.NaN;
    let sampleCounter = Number.NaN;
    let edgeCount = 0;
    let channelLayout = 0;
    if (flags & WireFlag.sampleRate) {
      sampleRateHz = readU32(bytes, at);
      at += 4;
    }
    if (flags & WireFlag.timestamp) {
      timestampUs = readU32(bytes, at);
      at += 4;
    }
    if (flags & WireFlag.sampleCounter) {
      sampleCounter = readU32(bytes, at);
      at += 4;
    }
    if (flags & WireFlag.edges) {
      edgeCount = bytes[at]! | (bytes[at + 1]! << 8);
      at += 2;
    }
    if (flags & WireFlag.channelLayout) {
      channelLayout = readU32(bytes, at);
      at += 4;
    }
    // Set before the check, which reads it there (a dropped repeat's value is overwritten by the next frame's).
    block.sampleCounter = sampleCounter;
    if (!checkSequence(sequence, samplesPerFrame, readU32(bytes, p + length - WIRE_CRC_BYTES) | 0)) return false;

    const valueCount = channels * samplesPerFrame;
    if (LITTLE_ENDIAN_HOST) {
      bytes.copyWithin(0, at, at + 2 * valueCount);
      at += 2 * valueCount;
    } else {
      // Int16Array stores wrap modulo 2^16, which turns the unsigned little-endian pair into its signed value.
      for (let i = 0; i < valueCount; i++) {
        sampleStore[i] = bytes[at]! | (bytes[at + 1]! << 8);
        at += 2;
      }
    }
    let edgesKept = 0;
    for (let e = 0; e < edgeCount; e++) {
      const sample = bytes[at]! | (bytes[at + 1]! << 8);
      const lead = bytes[at + 2]! | (bytes[at + 3]! << 8);
      const line = bytes[at + 4]!;
      const polarity = bytes[at + 5]!;
      at += WIRE_EDGE_BYTES;
      if (sample >= samplesPerFrame || line > WIRE_MAX_EDGE_LINE || (polarity !== WireEdgePolarity.rising && polarity !== WireEdgePolarity.falling)) {
        counters.edgeRejects++;
        continue;
      }
      block.edgeTime[edgesKept] = sample - lead / WIRE_EDGE_LEAD_UNITS;
      block.edgeLine[edgesKept] = line;
      block.edgeRising[edgesKept] = polarity === WireEdgePolarity.rising ? 1 : 0;
      edgesKept++;
    }
    // A new view only when the frame size changes, so steady streams allocate nothing.
    if (block.samples.length !== valueCount) block.samples = sampleStore.subarray(0, valueCount);
    // The outputs per axis of a layout, so the block goes into createAxes as it is; a new array only when it changes.
    if (channelLayout !== block.channelLayout || channels !== block.channelCount) {
      block.axisOutputs = channelLayout === 0 ? undefined : Object.freeze(axisOutputsOf(channels, channelLayout)!);
    }
    block.channelCount = channels;
    block.channelLayout = channelLayout;
    block.samplesPerFrame = samplesPerFrame;
    block.sequence = sequence;
    block.sampleIndex = expected.sampleIndex;
    block.sampleRateHz = sampleRateHz;
    block.timestampUs = timestampUs;
    block.edgeCount = edgesKept;
    expected.sampleIndex += samplesPerFrame;
    counters.framesGood++;
    inSync = true;
    onFrame(block);
    return true;
  }

  /**
   * Decodes every complete frame in the area's `[start, end)` and returns the index where the unfinished tail
   * begins (end when nothing is left).
   */
  function parse(start: number, end: number): number {
    const bytes = area;
    let p = start;
    while (p < end) {
      if (bytes[p] !== WIRE_SYNC_0) {
        let next = p + 1;
        while (next < end && bytes[next] !== WIRE_SYNC_0) next++;
        skip(next - p);
        p = next;
        continue;
      }
      const available = end - p;
      if (available < 2) break;
      if (bytes[p + 1] !== WIRE_SYNC_1) {
        skip(1);
        p++;
        continue;
      }
      if (available < WIRE_FIXED_HEADER_BYTES) break;
      const length = frameLengthAt(bytes, p, available);
      if (length < 0) break;
      if (length === 0) {
        counters.headerRejects++;
        skip(1);
        p++;
        continue;
      }
      if (available < length) break;
      const crcEnd = p + length - WIRE_CRC_BYTES;
      const crc = kernel !== null ? kernel.crc32c(p, crcEnd) : areaQuads !== null ? crc32cWords(bytes, areaQuads, p, crcEnd) : crc32c(bytes, p, crcEnd);
      if (crc !== readU32(bytes, p + length - WIRE_CRC_BYTES)) {
        // Retry from the next byte: the real frame start may lie inside this false or damaged candidate.
        counters.crcFailures++;
        skip(1);
        p++;
        continue;
      }
      // A repeat is dropped whole (its bytes were a good frame, not garbage to hunt through).
      if (deliver(p, length)) framesInPush++;
      p += length;
    }
    return p;
  }

  function push(chunk: Uint8Array): number {
    counters.bytesIn += chunk.length;
    framesInPush = 0;
    let read = 0;
    while (read < chunk.length) {
      // After the unfinished frame, as much of the chunk as fits; parse; keep the new unfinished frame.
      const count = Math.min(chunk.length - read, workBytes - filled);
      const at = workAt + filled;
      if (count > 64) area.set(read === 0 && count === chunk.length ? chunk : chunk.subarray(read, read + count), at);
      else for (let i = 0; i < count; i++) area[at + i] = chunk[read + i]!;
      read += count;
      const end = at + count;
      const tail = parse(workAt, end);
      if (tail > workAt) area.copyWithin(workAt, tail, end);
      filled = end - tail;
    }
    return framesInPush;
  }

  function flushPartial(): number {
    const dropped = filled;
    counters.bytesSkipped += dropped;
    filled = 0;
    inSync = true;
    return dropped;
  }

  function reset(): void {
    filled = 0;
    inSync = true;
    expected.sequence = -1;
    expected.counter = -1;
    recentSequence.fill(-1);
    recentAt = 0;
    expected.sampleIndex = 0;
    for (const key of Object.keys(counters) as (keyof WireDecoderCounters)[]) counters[key] = 0;
  }

  reset();
  return { config, counters, push, flushPartial, reset };
}
