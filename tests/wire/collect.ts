// Test helper: a decoder that copies every frame and gap it reports into plain records.
import { createWireCrcKernel, type WireCrcKernel } from '../../src/accel/wire-crc.js';
import { createWireDecoderWith } from '../../src/io/wire/decoder.js';
import type { InputGap, SampleBlock, WireDecoder, WireDecoderOptions } from '../../src/io/wire/index.js';

export interface CopiedBlock {
  sequence: number;
  channelCount: number;
  /** The packed channel layout (0: pairs). */
  channelLayout: number;
  samplesPerFrame: number;
  sampleIndex: number;
  sampleRateHz: number;
  timestampUs: number;
  sampleCounter: number;
  samples: number[];
  /** Edges as [time in sample periods from the block's first sample, line, rising 1/0]. */
  edges: [number, number, number][];
}

export function copyBlock(block: SampleBlock): CopiedBlock {
  return {
    sequence: block.sequence,
    channelCount: block.channelCount,
    channelLayout: block.channelLayout,
    samplesPerFrame: block.samplesPerFrame,
    sampleIndex: block.sampleIndex,
    sampleRateHz: block.sampleRateHz,
    timestampUs: block.timestampUs,
    sampleCounter: block.sampleCounter,
    samples: Array.from(block.samples),
    edges: Array.from({ length: block.edgeCount }, (_, e) => [block.edgeTime[e]!, block.edgeLine[e]!, block.edgeRising[e]!]),
  };
}

export interface Collector {
  decoder: WireDecoder;
  frames: CopiedBlock[];
  gaps: InputGap[];
}

/** A decoder recording what it reports; `crcKernel` as createWireDecoderWith takes it (default: createWireDecoder's). */
export function collectingDecoder(
  options: Omit<WireDecoderOptions, 'onFrame' | 'onGap'> = {},
  crcKernel: (byteCapacity: number) => WireCrcKernel | null = createWireCrcKernel,
): Collector {
  const frames: CopiedBlock[] = [];
  const gaps: InputGap[] = [];
  const decoder = createWireDecoderWith({ ...options, onFrame: (block) => frames.push(copyBlock(block)), onGap: (gap) => gaps.push(gap) }, crcKernel);
  return { decoder, frames, gaps };
}
