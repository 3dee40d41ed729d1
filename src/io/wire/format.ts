// The fringetally serial frame, versions 1 to 3: constants, sizes and the reference encoder.
// Layout and rules are specified in docs/wire-format.md; tools/firmware/fringetally_wire.h mirrors them in C.

import { integerInRange, OptionError } from '../../core/options.js';
import { crc32c } from './crc32c.js';

/** First and second byte of every frame. */
export const WIRE_SYNC_0 = 0xa5;
export const WIRE_SYNC_1 = 0x5a;
/** The version this code writes when a frame needs none of the version 2 fields. */
export const WIRE_VERSION = 1;
/** The version that adds the sample counter and the edge records; the decoder reads every version. */
export const WIRE_VERSION_2 = 2;
/** The version that adds the channel layout (2, 3 or 4 detector outputs per axis). */
export const WIRE_VERSION_3 = 3;
/** Sample-format codes (header byte 3). */
export const WireSampleFormat = { int16le: 1 } as const;
/** Flag bits (header byte 5). Optional fields follow the fixed header in bit order; all other bits must be zero. */
export const WireFlag = {
  /** A u32 sample rate in Hz follows the fixed header. */
  sampleRate: 1,
  /** A u32 timestamp in microseconds (of the frame's first sample, device clock, wraps) follows. */
  timestamp: 2,
  /** Version 2: a u32 sample counter, the device's count of the frame's first sample (wraps at 2^32). */
  sampleCounter: 4,
  /** Version 2: a u16 edge count E; E edge records of 6 bytes follow the samples. */
  edges: 8,
  /** Version 3: a u32 channel layout, the detector outputs of each axis (4 bits per axis, see `packChannelLayout`). */
  channelLayout: 16,
} as const;
const KNOWN_FLAGS_V1 = WireFlag.sampleRate | WireFlag.timestamp;
const KNOWN_FLAGS_V2 = KNOWN_FLAGS_V1 | WireFlag.sampleCounter | WireFlag.edges;
const KNOWN_FLAGS_V3 = KNOWN_FLAGS_V2 | WireFlag.channelLayout;

/** Bytes of the fixed header: sync(2) version(1) format(1) channels(1) flags(1) sequence(2) samplesPerFrame(2). */
export const WIRE_FIXED_HEADER_BYTES = 10;
/** Bytes of each optional u32 field (rate, timestamp, sample counter). */
export const WIRE_OPTIONAL_FIELD_BYTES = 4;
/** Bytes of the edge-count field (u16). */
export const WIRE_EDGE_COUNT_BYTES = 2;
/** Fewest detector outputs one axis may have in a channel layout: 2 (a quadrature pair). */
export const WIRE_MIN_AXIS_OUTPUTS = 2;
/** Most detector outputs one axis may have in a channel layout: 4 (two balanced pairs); 3 are about 120° apart. */
export const WIRE_MAX_AXIS_OUTPUTS = 4;
/** Axes a channel layout can describe: one 4-bit field each in a u32. */
export const WIRE_MAX_LAYOUT_AXES = 8;
/** Bytes of one edge record: sample u16, lead u16, line u8, polarity u8. */
export const WIRE_EDGE_BYTES = 6;
export const WIRE_CRC_BYTES = 4;
/** Sequence counters are u16 and wrap from 65535 to 0. */
export const WIRE_SEQUENCE_MODULUS = 65536;
/** Sample counters are u32 and wrap from 2^32 − 1 to 0. */
export const WIRE_SAMPLE_COUNTER_MODULUS = 2 ** 32;
/** Limits this implementation accepts (the wire fields could express more). */
export const WIRE_MAX_CHANNELS = 16;
export const WIRE_MAX_SAMPLES_PER_FRAME = 4096;
/** Most edge records one frame may carry. */
export const WIRE_MAX_EDGES_PER_FRAME = 256;
/** An edge's lead counts 2^-16 sample periods: the resolution of edge times. */
export const WIRE_EDGE_LEAD_UNITS = 65536;
/** Input lines an edge record may name: 0 trigger, 1 reference mark, 2..7 further trigger inputs. */
export const WIRE_MAX_EDGE_LINE = 7;
/** Edge line numbers with a fixed meaning. */
export const WireEdgeLine = { trigger: 0, referenceMark: 1 } as const;
/** Edge polarity codes (byte 5 of an edge record). */
export const WireEdgePolarity = { rising: 1, falling: 2 } as const;

/** One edge of a digital input, timed by the device against the sample clock. */
export interface WireEdge {
  /** Index in the frame of the first sample taken at or after the edge, 0..samplesPerFrame − 1. */
  readonly sample: number;
  /** How long before that sample the edge came, in 2^-16 sample periods, 0..65535. */
  readonly lead: number;
  /** Input line, 0..7: 0 trigger, 1 reference mark. */
  readonly line: number;
  readonly rising: boolean;
}

/** The header fields of one frame. */
export interface WireFrameHeader {
  /** u16 frame counter, 0..65535, +1 per frame, wraps. */
  readonly sequence: number;
  /**
   * Number of interleaved channels, 2..16: even without a channel layout (channel 2k is x and 2k+1 is y of axis
   * k); with one, the sum of its outputs (the axes' outputs follow each other).
   */
  readonly channelCount: number;
  /** Samples per channel in this frame, 1..4096. */
  readonly samplesPerFrame: number;
  /** Sample rate in Hz (integer 1..2^32-1), or undefined to leave the field out. */
  readonly sampleRateHz?: number | undefined;
  /** Device time of the first sample in µs (u32, wraps), or undefined to leave the field out. */
  readonly timestampUs?: number | undefined;
  /** Version 2: the device's count of the frame's first sample (u32, wraps), or undefined to leave it out. */
  readonly sampleCounter?: number | undefined;
  /** Version 2: edges inside the frame's span, at most 256, or undefined to leave the field out. */
  readonly edges?: readonly WireEdge[] | undefined;
  /** Version 3: detector outputs of each axis in channel order (each 2..4, 1..8 axes), or undefined to leave it out. */
  readonly channelLayout?: readonly number[] | undefined;
}

/**
 * The channel layout as sent: axis k's outputs in bits 4k..4k+3, the axes from bit 0 up, 0 after the last.
 * Throws an OptionError for an axis count or an output count out of range.
 */
export function packChannelLayout(outputs: readonly number[]): number {
  integerInRange('channelLayout.length', outputs.length, 1, WIRE_MAX_LAYOUT_AXES);
  let packed = 0;
  outputs.forEach((count, k) => {
    integerInRange(`channelLayout[${k}]`, count, WIRE_MIN_AXIS_OUTPUTS, WIRE_MAX_AXIS_OUTPUTS);
    packed += count * 16 ** k;
  });
  return packed;
}

/**
 * The detector outputs of each axis of a frame: from its packed channel layout, or pairs when it has none
 * (`packed` 0). Null when the layout is invalid: an output count out of 2..4, a field after the first 0, or a sum
 * other than `channelCount`.
 */
export function axisOutputsOf(channelCount: number, packed: number): number[] | null {
  if (packed === 0) return channelCount % 2 === 0 ? Array.from({ length: channelCount / 2 }, () => 2) : null;
  const outputs: number[] = [];
  let rest = packed;
  let sum = 0;
  while (rest !== 0) {
    const count = rest % 16;
    if (count < WIRE_MIN_AXIS_OUTPUTS || count > WIRE_MAX_AXIS_OUTPUTS) return null;
    outputs.push(count);
    sum += count;
    rest = Math.floor(rest / 16);
  }
  return sum === channelCount ? outputs : null;
}

/** Bytes before the samples for a flags byte: fixed header plus the optional fields. */
export function wireHeaderLength(flags: number): number {
  return (
    WIRE_FIXED_HEADER_BYTES +
    (flags & WireFlag.sampleRate ? WIRE_OPTIONAL_FIELD_BYTES : 0) +
    (flags & WireFlag.timestamp ? WIRE_OPTIONAL_FIELD_BYTES : 0) +
    (flags & WireFlag.sampleCounter ? WIRE_OPTIONAL_FIELD_BYTES : 0) +
    (flags & WireFlag.edges ? WIRE_EDGE_COUNT_BYTES : 0) +
    (flags & WireFlag.channelLayout ? WIRE_OPTIONAL_FIELD_BYTES : 0)
  );
}

/** Bytes of a whole frame (header, optional fields, payload, edge records, CRC). */
export function wireFrameLength(channelCount: number, samplesPerFrame: number, flags: number, edgeCount = 0): number {
  return wireHeaderLength(flags) + channelCount * samplesPerFrame * 2 + edgeCount * WIRE_EDGE_BYTES + WIRE_CRC_BYTES;
}

/** Largest frame the given limits allow (every optional field present, the most edges). */
export function wireMaxFrameLength(maxChannels: number, maxSamplesPerFrame: number): number {
  return wireFrameLength(maxChannels, maxSamplesPerFrame, KNOWN_FLAGS_V3, WIRE_MAX_EDGES_PER_FRAME);
}

/** True when a flags byte has only bits the given version defines. */
export function wireFlagsKnown(flags: number, version = WIRE_VERSION): boolean {
  return (flags & ~(version === WIRE_VERSION ? KNOWN_FLAGS_V1 : version === WIRE_VERSION_2 ? KNOWN_FLAGS_V2 : KNOWN_FLAGS_V3)) === 0;
}

function flagsOf(header: WireFrameHeader): number {
  return (
    (header.sampleRateHz === undefined ? 0 : WireFlag.sampleRate) |
    (header.timestampUs === undefined ? 0 : WireFlag.timestamp) |
    (header.sampleCounter === undefined ? 0 : WireFlag.sampleCounter) |
    (header.edges === undefined ? 0 : WireFlag.edges) |
    (header.channelLayout === undefined ? 0 : WireFlag.channelLayout)
  );
}

/**
 * The version a header needs: the lowest that defines every field it uses (3 for a channel layout, 2 for the
 * sample counter or edges, else 1), so readers of the earlier versions keep working with frames that need nothing newer.
 */
export function wireVersionOf(header: WireFrameHeader): number {
  const flags = flagsOf(header);
  return flags & ~KNOWN_FLAGS_V2 ? WIRE_VERSION_3 : flags & ~KNOWN_FLAGS_V1 ? WIRE_VERSION_2 : WIRE_VERSION;
}


/** Bytes `encodeWireFrame` will write for this header. */
export function wireFrameLengthOf(header: WireFrameHeader): number {
  return wireFrameLength(header.channelCount, header.samplesPerFrame, flagsOf(header), header.edges?.length ?? 0);
}

/**
 * Writes one frame into `out` at `offset` and returns the bytes written: version 1 unless the header uses a
 * version 2 field (sample counter, edges).
 * `samples` holds channelCount × samplesPerFrame interleaved int16 values (s0c0 s0c1 … s1c0 …).
 * Throws a RangeError naming the field when a header field, an edge, a sample or the output size is out of
 * range: this is the sender's side, where a wrong argument is a programming error.
 */
export function encodeWireFrame(header: WireFrameHeader, samples: ArrayLike<number>, out: Uint8Array, offset = 0): number {
  integerInRange('sequence', header.sequence, 0, WIRE_SEQUENCE_MODULUS - 1);
  integerInRange('channelCount', header.channelCount, 2, WIRE_MAX_CHANNELS);
  const layout = header.channelLayout === undefined ? 0 : packChannelLayout(header.channelLayout);
  if (header.channelLayout === undefined && header.channelCount % 2 !== 0) throw new OptionError('channelCount', 'even without a channelLayout', header.channelCount);
  if (axisOutputsOf(header.channelCount, layout) === null) {
    throw new OptionError('channelCount', `the sum of channelLayout's outputs [${header.channelLayout!.join(', ')}]`, header.channelCount);
  }
  integerInRange('samplesPerFrame', header.samplesPerFrame, 1, WIRE_MAX_SAMPLES_PER_FRAME);
  if (header.sampleRateHz !== undefined) integerInRange('sampleRateHz', header.sampleRateHz, 1, 0xffffffff);
  if (header.timestampUs !== undefined) integerInRange('timestampUs', header.timestampUs, 0, 0xffffffff);
  if (header.sampleCounter !== undefined) integerInRange('sampleCounter', header.sampleCounter, 0, 0xffffffff);
  const edges = header.edges ?? [];
  integerInRange('edges.length', edges.length, 0, WIRE_MAX_EDGES_PER_FRAME);
  edges.forEach((edge, i) => {
    integerInRange(`edges[${i}].sample`, edge.sample, 0, header.samplesPerFrame - 1);
    integerInRange(`edges[${i}].lead`, edge.lead, 0, WIRE_EDGE_LEAD_UNITS - 1);
    integerInRange(`edges[${i}].line`, edge.line, 0, WIRE_MAX_EDGE_LINE);
  });
  const valueCount = header.channelCount * header.samplesPerFrame;
  if (samples.length < valueCount) {
    throw new RangeError(`samples must hold channelCount × samplesPerFrame = ${valueCount} values (got ${samples.length})`);
  }
  const flags = flagsOf(header);
  const length = wireFrameLength(header.channelCount, header.samplesPerFrame, flags, edges.length);
  if (offset < 0 || offset + length > out.length) {
    throw new RangeError(`out must have ${length} bytes free at offset ${offset} (has ${out.length - offset})`);
  }
  let at = offset;
  out[at++] = WIRE_SYNC_0;
  out[at++] = WIRE_SYNC_1;
  out[at++] = wireVersionOf(header);
  out[at++] = WireSampleFormat.int16le;
  out[at++] = header.channelCount;
  out[at++] = flags;
  at = writeU16(out, at, header.sequence);
  at = writeU16(out, at, header.samplesPerFrame);
  if (header.sampleRateHz !== undefined) at = writeU32(out, at, header.sampleRateHz);
  if (header.timestampUs !== undefined) at = writeU32(out, at, header.timestampUs);
  if (header.sampleCounter !== undefined) at = writeU32(out, at, header.sampleCounter);
  if (header.edges !== undefined) at = writeU16(out, at, edges.length);
  if (header.channelLayout !== undefined) at = writeU32(out, at, layout);
  for (let i = 0; i < valueCount; i++) {
    const value = samples[i]!;
    if (!Number.isInteger(value) || value < -32768 || value > 32767) {
      throw new RangeError(`samples[${i}] must be an int16 integer in -32768..32767 (got ${value})`);
    }
    at = writeU16(out, at, value & 0xffff);
  }
  for (const edge of edges) {
    at = writeU16(out, at, edge.sample);
    at = writeU16(out, at, edge.lead);
    out[at++] = edge.line;
    out[at++] = edge.rising ? WireEdgePolarity.rising : WireEdgePolarity.falling;
  }
  writeU32(out, at, crc32c(out, offset, at));
  return length;
}

function writeU16(out: Uint8Array, at: number, value: number): number {
  out[at] = value & 0xff;
  out[at + 1] = (value >>> 8) & 0xff;
  return at + 2;
}

function writeU32(out: Uint8Array, at: number, value: number): number {
  out[at] = value & 0xff;
  out[at + 1] = (value >>> 8) & 0xff;
  out[at + 2] = (value >>> 16) & 0xff;
  out[at + 3] = (value >>> 24) & 0xff;
  return at + 4;
}

/** Reads a little-endian u32 at `at`. */
export function readU32(bytes: Uint8Array, at: number): number {
  return (bytes[at]! | (bytes[at + 1]! << 8) | (bytes[at + 2]! << 16) | (bytes[at + 3]! << 24)) >>> 0;
}
