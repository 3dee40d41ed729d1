// Test helper: a decoder that copies every frame and gap it reports into plain records.
import { createWireDecoder, type InputGap, type SampleBlock, type WireDecoder, type WireDecoderOptions } from '../../src/io/wire/index.js';

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

export function collectingDecoder(options: Omit<WireDecoderOptions, 'onFrame' | 'onGap'> = {}): Collector {
  const frames: CopiedBlock[] = [];
  const gaps: InputGap[] = [];
  const decoder = createWireDecoder({ ...options, onFrame: (block) => frames.push(copyBlock(block)), onGap: (gap) => gaps.push(gap) });
  return { decoder, frames, gaps };
}
