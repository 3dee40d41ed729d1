// Test helper: invented frames built with the reference encoder.
import { encodeWireFrame, wireFrameLengthOf, type WireFrameHeader } from '../../src/io/wire/index.js';

export function frameBytes(header: WireFrameHeader, samples: ArrayLike<number>): Uint8Array {
  const out = new Uint8Array(wireFrameLengthOf(header));
  encodeWireFrame(header, samples, out);
  return out;
}

/** A frame whose samples are a simple function of sequence, sample and channel, so frames are distinguishable. */
export function syntheticFrame(sequence: number, channelCount = 2, samplesPerFrame = 4, extra: Partial<WireFrameHeader> = {}): Uint8Array {
  const samples = Array.from({ length: channelCount * samplesPerFrame }, (_, i) => ((sequence * 997 + i * 131) % 65536) - 32768);
  return frameBytes({ sequence, channelCount, samplesPerFrame, ...extra }, samples);
}

export function concat(parts: readonly Uint8Array[]): Uint8Array {
  const out = new Uint8Array(parts.reduce((sum, p) => sum + p.length, 0));
  let at = 0;
  for (const part of parts) {
    out.set(part, at);
    at += part.length;
  }
  return out;
}
