// The fringetally serial frame, version 1: constants, sizes and the reference encoder.
// Layout and rules are specified in docs/wire-format.md; tools/firmware/fringetally_wire.h mirrors them in C.

import { crc32c } from './crc32c.js';

/** First and second byte of every frame. */
export const WIRE_SYNC_0 = 0xa5;
export const WIRE_SYNC_1 = 0x5a;
/** The only format version this code writes and reads. */
export const WIRE_VERSION = 1;
/** Sample-format codes (header byte 3). */
export const WireSampleFormat = { int16le: 1 } as const;
/** Flag bits (header byte 5); all other bits must be zero. */
export const WireFlag = {
  /** A u32 sample rate in Hz follows the fixed header. */
  sampleRate: 1,
  /** A u32 timestamp in microseconds (of the frame's first sample, device clock, wraps) follows. */
  timestamp: 2,
} as const;
const KNOWN_FLAGS = WireFlag.sampleRate | WireFlag.timestamp;

/** Bytes of the fixed header: sync(2) version(1) format(1) channels(1) flags(1) sequence(2) samplesPerFrame(2). */
export const WIRE_FIXED_HEADER_BYTES = 10;
/** Bytes of each optional field (rate, timestamp). */
export const WIRE_OPTIONAL_FIELD_BYTES = 4;
export const WIRE_CRC_BYTES = 4;
/** Sequence counters are u16 and wrap from 65535 to 0. */
export const WIRE_SEQUENCE_MODULUS = 65536;
/** Limits this implementation accepts (the wire fields could express more). */
export const WIRE_MAX_CHANNELS = 16;
export const WIRE_MAX_SAMPLES_PER_FRAME = 4096;

/** The header fields of one frame. */
export interface WireFrameHeader {
  /** u16 frame counter, 0..65535, +1 per frame, wraps. */
  readonly sequence: number;
  /** Number of interleaved channels, even, 2..16; channel 2k is x and 2k+1 is y of axis k. */
  readonly channelCount: number;
  /** Samples per channel in this frame, 1..4096. */
  readonly samplesPerFrame: number;
  /** Sample rate in Hz (integer 1..2^32-1), or undefined to leave the field out. */
  readonly sampleRateHz?: number | undefined;
  /** Device time of the first sample in µs (u32, wraps), or undefined to leave the field out. */
  readonly timestampUs?: number | undefined;
}

/** Bytes of a whole frame (header, optional fields, payload, CRC). */
export function wireFrameLength(channelCount: number, samplesPerFrame: number, flags: number): number {
  const optionalFields = (flags & WireFlag.sampleRate ? 1 : 0) + (flags & WireFlag.timestamp ? 1 : 0);
  return (
    WIRE_FIXED_HEADER_BYTES + optionalFields * WIRE_OPTIONAL_FIELD_BYTES + channelCount * samplesPerFrame * 2 + WIRE_CRC_BYTES
  );
}

/** Largest frame the given limits allow (both optional fields present). */
export function wireMaxFrameLength(maxChannels: number, maxSamplesPerFrame: number): number {
  return wireFrameLength(maxChannels, maxSamplesPerFrame, KNOWN_FLAGS);
}

/** True when a flags byte has only known bits. */
export function wireFlagsKnown(flags: number): boolean {
  return (flags & ~KNOWN_FLAGS) === 0;
}

function flagsOf(header: WireFrameHeader): number {
  return (header.sampleRateHz === undefined ? 0 : WireFlag.sampleRate) | (header.timestampUs === undefined ? 0 : WireFlag.timestamp);
}

function checkUint(name: string, value: number, min: number, max: number): void {
  if (!Number.isInteger(value) || value < min || value > max) {
    throw new RangeError(`${name} must be an integer in ${min}..${max} (got ${value})`);
  }
}

/** Bytes `encodeWireFrame` will write for this header. */
export function wireFrameLengthOf(header: WireFrameHeader): number {
  return wireFrameLength(header.channelCount, header.samplesPerFrame, flagsOf(header));
}

/**
 * Writes one frame into `out` at `offset` and returns the bytes written.
 * `samples` holds channelCount × samplesPerFrame interleaved int16 values (s0c0 s0c1 … s1c0 …).
 * Throws a RangeError naming the field when a header field, a sample or the output size is out of range:
 * this is the sender's side, where a wrong argument is a programming error.
 */
export function encodeWireFrame(header: WireFrameHeader, samples: ArrayLike<number>, out: Uint8Array, offset = 0): number {
  checkUint('sequence', header.sequence, 0, WIRE_SEQUENCE_MODULUS - 1);
  checkUint('channelCount', header.channelCount, 2, WIRE_MAX_CHANNELS);
  if (header.channelCount % 2 !== 0) throw new RangeError(`channelCount must be even (got ${header.channelCount})`);
  checkUint('samplesPerFrame', header.samplesPerFrame, 1, WIRE_MAX_SAMPLES_PER_FRAME);
  if (header.sampleRateHz !== undefined) checkUint('sampleRateHz', header.sampleRateHz, 1, 0xffffffff);
  if (header.timestampUs !== undefined) checkUint('timestampUs', header.timestampUs, 0, 0xffffffff);
  const valueCount = header.channelCount * header.samplesPerFrame;
  if (samples.length < valueCount) {
    throw new RangeError(`samples must hold channelCount × samplesPerFrame = ${valueCount} values (got ${samples.length})`);
  }
  const flags = flagsOf(header);
  const length = wireFrameLength(header.channelCount, header.samplesPerFrame, flags);
  if (offset < 0 || offset + length > out.length) {
    throw new RangeError(`out must have ${length} bytes free at offset ${offset} (has ${out.length - offset})`);
  }
  let at = offset;
  out[at++] = WIRE_SYNC_0;
  out[at++] = WIRE_SYNC_1;
  out[at++] = WIRE_VERSION;
  out[at++] = WireSampleFormat.int16le;
  out[at++] = header.channelCount;
  out[at++] = flags;
  out[at++] = header.sequence & 0xff;
  out[at++] = header.sequence >>> 8;
  out[at++] = header.samplesPerFrame & 0xff;
  out[at++] = header.samplesPerFrame >>> 8;
  if (header.sampleRateHz !== undefined) at = writeU32(out, at, header.sampleRateHz);
  if (header.timestampUs !== undefined) at = writeU32(out, at, header.timestampUs);
  for (let i = 0; i < valueCount; i++) {
    const value = samples[i]!;
    if (!Number.isInteger(value) || value < -32768 || value > 32767) {
      throw new RangeError(`samples[${i}] must be an int16 integer in -32768..32767 (got ${value})`);
    }
    out[at++] = value & 0xff;
    out[at++] = (value >> 8) & 0xff;
  }
  writeU32(out, at, crc32c(out, offset, at));
  return length;
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
