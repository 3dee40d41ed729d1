// Incremental decoder for the fringetally wire frame (docs/wire-format.md): byte chunks in, sample blocks out.
// Keeps partial frames across chunks, hunts for the sync marker after garbage, drops frames failing CRC-32C,
// reports sequence gaps. Never throws on bad bytes; one buffer sized for the largest allowed frame, no
// allocation per frame in steady state.

import type { InputGap, SampleBlock } from './block.js';
import { crc32c } from './crc32c.js';
import {
  WIRE_CRC_BYTES,
  WIRE_FIXED_HEADER_BYTES,
  WIRE_MAX_CHANNELS,
  WIRE_MAX_SAMPLES_PER_FRAME,
  WIRE_OPTIONAL_FIELD_BYTES,
  WIRE_SEQUENCE_MODULUS,
  WIRE_SYNC_0,
  WIRE_SYNC_1,
  WIRE_VERSION,
  WireFlag,
  WireSampleFormat,
  readU32,
  wireFlagsKnown,
  wireMaxFrameLength,
} from './format.js';

export interface WireDecoderOptions {
  /** Largest channel count accepted; even, 2..16. Default 16. Frames with more are rejected as bad headers. */
  readonly maxChannels?: number;
  /** Largest samples per frame accepted; 1..4096. Default 1024. Sets the buffer size with maxChannels. */
  readonly maxSamplesPerFrame?: number;
  /** Called once per good frame with a reused block (valid only during the call). */
  readonly onFrame: (block: SampleBlock) => void;
  /** Called before the frame that follows a sequence jump; the pipeline turns it into an input-gap event. */
  readonly onGap: (gap: InputGap) => void;
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
  framesGood: number;
  /** Candidate frames with a valid header whose CRC did not match. */
  crcFailures: number;
  /** Sync markers followed by an impossible header (version, format, channels, flags, size). */
  headerRejects: number;
  /** Times the decoder lost sync and had to hunt for the marker (a start in mid-frame counts once). */
  resyncs: number;
  /** Sequence jumps reported through onGap. */
  gaps: number;
  /** Sum of InputGap.lostSamples. */
  lostSamples: number;
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

function integerIn(name: string, value: number, min: number, max: number): number {
  if (!Number.isInteger(value) || value < min || value > max) {
    throw new RangeError(`${name} must be an integer in ${min}..${max} (got ${value})`);
  }
  return value;
}

export function createWireDecoder(options: WireDecoderOptions): WireDecoder {
  const maxChannels = integerIn('maxChannels', options.maxChannels ?? WIRE_MAX_CHANNELS, 2, WIRE_MAX_CHANNELS);
  if (maxChannels % 2 !== 0) throw new RangeError(`maxChannels must be even (got ${maxChannels})`);
  const maxSamplesPerFrame = integerIn(
    'maxSamplesPerFrame',
    options.maxSamplesPerFrame ?? 1024,
    1,
    WIRE_MAX_SAMPLES_PER_FRAME,
  );
  if (typeof options.onFrame !== 'function') throw new TypeError(`onFrame must be a function (got ${typeof options.onFrame})`);
  if (typeof options.onGap !== 'function') throw new TypeError(`onGap must be a function (got ${typeof options.onGap})`);
  const { onFrame, onGap } = options;
  const bufferBytes = wireMaxFrameLength(maxChannels, maxSamplesPerFrame);
  const config: WireDecoderConfig = Object.freeze({ maxChannels, maxSamplesPerFrame, bufferBytes });

  const buffer = new Uint8Array(bufferBytes);
  const sampleStore = new Int16Array(maxChannels * maxSamplesPerFrame);
  const counters: WireDecoderCounters = {
    bytesIn: 0,
    framesGood: 0,
    crcFailures: 0,
    headerRejects: 0,
    resyncs: 0,
    gaps: 0,
    lostSamples: 0,
    bytesSkipped: 0,
  };
  const block = {
    samples: sampleStore.subarray(0, 0),
    channelCount: 0,
    samplesPerFrame: 0,
    sequence: 0,
    sampleIndex: 0,
    sampleRateHz: Number.NaN,
    timestampUs: Number.NaN,
  };

  let filled = 0;
  /** Frames delivered during the current push. */
  let framesInPush = 0;
  let inSync = true;
  let expectedSequence = -1;
  let nextSampleIndex = 0;

  function skip(count: number): void {
    if (count === 0) return;
    if (inSync) {
      counters.resyncs++;
      inSync = false;
    }
    counters.bytesSkipped += count;
  }

  /** Header at `p` of `bytes` (≥ 10 bytes present) → frame length, or 0 when the header is impossible. */
  function frameLengthAt(bytes: Uint8Array, p: number): number {
    if (bytes[p + 2] !== WIRE_VERSION || bytes[p + 3] !== WireSampleFormat.int16le) return 0;
    const channels = bytes[p + 4]!;
    const flags = bytes[p + 5]!;
    const samplesPerFrame = bytes[p + 8]! | (bytes[p + 9]! << 8);
    if (channels < 2 || channels > maxChannels || channels % 2 !== 0) return 0;
    if (!wireFlagsKnown(flags) || samplesPerFrame < 1 || samplesPerFrame > maxSamplesPerFrame) return 0;
    const optionalFields = (flags & WireFlag.sampleRate ? 1 : 0) + (flags & WireFlag.timestamp ? 1 : 0);
    return WIRE_FIXED_HEADER_BYTES + optionalFields * WIRE_OPTIONAL_FIELD_BYTES + channels * samplesPerFrame * 2 + WIRE_CRC_BYTES;
  }

  function deliver(bytes: Uint8Array, p: number): void {
    const channels = bytes[p + 4]!;
    const flags = bytes[p + 5]!;
    const sequence = bytes[p + 6]! | (bytes[p + 7]! << 8);
    const samplesPerFrame = bytes[p + 8]! | (bytes[p + 9]! << 8);
    let at = p + WIRE_FIXED_HEADER_BYTES;
    let sampleRateHz = Number.NaN;
    let timestampUs = Number.NaN;
    if (flags & WireFlag.sampleRate) {
      sampleRateHz = readU32(bytes, at);
      at += WIRE_OPTIONAL_FIELD_BYTES;
    }
    if (flags & WireFlag.timestamp) {
      timestampUs = readU32(bytes, at);
      at += WIRE_OPTIONAL_FIELD_BYTES;
    }
    if (expectedSequence >= 0 && sequence !== expectedSequence) {
      const lostFrames = (sequence - expectedSequence + WIRE_SEQUENCE_MODULUS) % WIRE_SEQUENCE_MODULUS;
      const lostSamples = lostFrames * samplesPerFrame;
      counters.gaps++;
      counters.lostSamples += lostSamples;
      // Gaps are rare: a fresh record each time lets the consumer keep it.
      onGap({ sampleIndex: nextSampleIndex, lostFrames, lostSamples, expectedSequence, receivedSequence: sequence });
    }
    expectedSequence = (sequence + 1) % WIRE_SEQUENCE_MODULUS;

    const valueCount = channels * samplesPerFrame;
    // Int16Array stores wrap modulo 2^16, which turns the unsigned little-endian pair into its signed value.
    for (let i = 0; i < valueCount; i++) {
      sampleStore[i] = bytes[at]! | (bytes[at + 1]! << 8);
      at += 2;
    }
    // A new view only when the frame size changes, so steady streams allocate nothing.
    if (block.samples.length !== valueCount) block.samples = sampleStore.subarray(0, valueCount);
    block.channelCount = channels;
    block.samplesPerFrame = samplesPerFrame;
    block.sequence = sequence;
    block.sampleIndex = nextSampleIndex;
    block.sampleRateHz = sampleRateHz;
    block.timestampUs = timestampUs;
    nextSampleIndex += samplesPerFrame;
    counters.framesGood++;
    inSync = true;
    onFrame(block);
  }

  /**
   * Decodes every complete frame in `bytes[start, end)` and returns the index where the unfinished tail
   * begins (end when nothing is left). Works on the internal buffer and, to avoid copying, on chunks.
   */
  function parse(bytes: Uint8Array, start: number, end: number): number {
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
      const length = frameLengthAt(bytes, p);
      if (length === 0) {
        counters.headerRejects++;
        skip(1);
        p++;
        continue;
      }
      if (available < length) break;
      if (crc32c(bytes, p, p + length - WIRE_CRC_BYTES) !== readU32(bytes, p + length - WIRE_CRC_BYTES)) {
        // Retry from the next byte: the real frame start may lie inside this false or damaged candidate.
        counters.crcFailures++;
        skip(1);
        p++;
        continue;
      }
      deliver(bytes, p);
      framesInPush++;
      p += length;
    }
    return p;
  }

  // Byte loops instead of set(subarray()): no view object per chunk.
  function copyIntoBuffer(chunk: Uint8Array, from: number, count: number): void {
    for (let i = 0; i < count; i++) buffer[filled + i] = chunk[from + i]!;
    filled += count;
  }

  function push(chunk: Uint8Array): number {
    counters.bytesIn += chunk.length;
    framesInPush = 0;
    let read = 0;
    // An unfinished frame is waiting: append to it in the buffer until what remains lies inside this chunk.
    while (filled > 0 && read < chunk.length) {
      const copied = Math.min(bufferBytes - filled, chunk.length - read);
      copyIntoBuffer(chunk, read, copied);
      read += copied;
      const tail = parse(buffer, 0, filled);
      const left = filled - tail;
      if (left <= copied) {
        // What is left came from this chunk: carry on reading the chunk itself.
        read -= left;
        filled = 0;
      } else {
        buffer.copyWithin(0, tail, filled);
        filled = left;
      }
    }
    if (read < chunk.length) {
      // Fast path: frames are decoded straight from the chunk; only its unfinished tail is kept.
      const tail = parse(chunk, read, chunk.length);
      copyIntoBuffer(chunk, tail, chunk.length - tail);
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
    expectedSequence = -1;
    nextSampleIndex = 0;
    for (const key of Object.keys(counters) as (keyof WireDecoderCounters)[]) counters[key] = 0;
  }

  reset();
  return { config, counters, push, flushPartial, reset };
}
