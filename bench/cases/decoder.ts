// Wire and text-line decoder throughput, in process: pre-encoded streams fed in serial-sized chunks.
// A sample is one sampling instant (all channels); `bytesPerPass` gives MB/s beside samples/s.

import type { BenchCase } from '../harness.js';
import {
  createLineDecoder,
  createWireDecoder,
  encodeWireFrame,
  formatSampleLines,
  wireFrameLength,
  type SampleBlock,
} from '../../src/io/wire/index.js';

/** A case that also reports its input size, so the runner can print MB/s = bytesPerPass / time. */
export interface DecoderBenchCase extends BenchCase {
  /** Input bytes one call of `pass` consumes. */
  readonly bytesPerPass: number;
}

/** Bytes per push: about what a serial read returns at high baud rates. */
const CHUNK_BYTES = 4096;
/** Input size per pass, so each pass takes well over a timer tick. */
const TARGET_BYTES = 1 << 20;

/** Invented test signal: a quadrature pair per axis with a slow phase ramp, quantised to int16. */
function testSamples(channelCount: number, count: number): Int16Array {
  const samples = new Int16Array(channelCount * count);
  for (let s = 0; s < count; s++) {
    for (let axis = 0; axis < channelCount / 2; axis++) {
      const phase = 0.01 * s * (axis + 1);
      samples[s * channelCount + 2 * axis] = Math.round(20000 * Math.cos(phase));
      samples[s * channelCount + 2 * axis + 1] = Math.round(20000 * Math.sin(phase));
    }
  }
  return samples;
}

/** A stream of consecutive frames; every `damageEvery`-th frame gets one flipped payload byte (0: none). */
function wireStream(channelCount: number, samplesPerFrame: number, damageEvery: number): { bytes: Uint8Array; frames: number } {
  const frameBytes = wireFrameLength(channelCount, samplesPerFrame, 1);
  const frames = Math.max(1, Math.floor(TARGET_BYTES / frameBytes));
  const bytes = new Uint8Array(frames * frameBytes);
  const samples = testSamples(channelCount, frames * samplesPerFrame);
  for (let f = 0; f < frames; f++) {
    const frameSamples = samples.subarray(f * channelCount * samplesPerFrame, (f + 1) * channelCount * samplesPerFrame);
    encodeWireFrame({ sequence: f % 65536, channelCount, samplesPerFrame, sampleRateHz: 1_000_000 }, frameSamples, bytes, f * frameBytes);
    if (damageEvery > 0 && f % damageEvery === damageEvery - 1) bytes[f * frameBytes + 20] ^= 0x01;
  }
  return { bytes, frames };
}

/** Pushes `bytes` in CHUNK_BYTES views made once in setup (no per-pass allocation). */
function chunksOf(bytes: Uint8Array): Uint8Array[] {
  const chunks: Uint8Array[] = [];
  for (let at = 0; at < bytes.length; at += CHUNK_BYTES) chunks.push(bytes.subarray(at, Math.min(at + CHUNK_BYTES, bytes.length)));
  return chunks;
}

/** Keeps the decoded values observable so the work cannot be optimised away. */
let sink = 0;
function consume(block: SampleBlock): void {
  sink = (sink + block.samples[0]! + block.samples[block.samples.length - 1]!) | 0;
}

function wireCase(channelCount: number, samplesPerFrame: number, damageEvery = 0): DecoderBenchCase {
  const { bytes, frames } = wireStream(channelCount, samplesPerFrame, damageEvery);
  const chunks = chunksOf(bytes);
  const decoder = createWireDecoder({ maxChannels: channelCount, maxSamplesPerFrame: samplesPerFrame, onFrame: consume, onGap: () => undefined });
  const suffix = damageEvery > 0 ? `/crc-fail-1-in-${damageEvery}` : '';
  return {
    name: `decoder/int16/${channelCount}ch/${samplesPerFrame}spf${suffix}`,
    samplesPerPass: frames * samplesPerFrame,
    bytesPerPass: bytes.length,
    pass() {
      // Each pass replays sequences from 0: reset so the replay is not reported as a gap.
      decoder.reset();
      for (const chunk of chunks) decoder.push(chunk);
    },
  };
}

/** Baseline: the bare little-endian int16 conversion of the same bytes, no framing, sync or CRC. */
function baselineCase(channelCount: number, samplesPerFrame: number): DecoderBenchCase {
  const { bytes, frames } = wireStream(channelCount, samplesPerFrame, 0);
  const out = new Int16Array(bytes.length >> 1);
  return {
    name: `decoder/baseline-int16-copy/${channelCount}ch/${samplesPerFrame}spf`,
    samplesPerPass: frames * samplesPerFrame,
    bytesPerPass: bytes.length,
    pass() {
      for (let i = 0, at = 0; i < out.length; i++, at += 2) out[i] = bytes[at]! | (bytes[at + 1]! << 8);
      sink = (sink + out[out.length - 1]!) | 0;
    },
  };
}

function lineCase(channelCount: number): DecoderBenchCase {
  const count = Math.floor(TARGET_BYTES / (7 * channelCount));
  const bytes = Uint8Array.from(Buffer.from(formatSampleLines(testSamples(channelCount, count), channelCount, count), 'latin1'));
  const chunks = chunksOf(bytes);
  const decoder = createLineDecoder({ channelCount, maxSamplesPerBlock: 1024, onBlock: consume });
  return {
    name: `decoder/text-lines/${channelCount}ch`,
    samplesPerPass: count,
    bytesPerPass: bytes.length,
    pass() {
      decoder.reset();
      for (const chunk of chunks) decoder.push(chunk);
      decoder.end();
    },
  };
}

export function decoderCases(): DecoderBenchCase[] {
  return [
    baselineCase(2, 256),
    wireCase(2, 16),
    wireCase(2, 256),
    wireCase(8, 1024),
    wireCase(2, 256, 10),
    lineCase(2),
  ];
}
