// The shared wire test vectors (tests/wire/wire-vectors.json), typed.
import { readFileSync } from 'node:fs';
import { packChannelLayout, type WireFrameHeader } from '../../src/io/wire/index.js';

export interface FrameVector {
  readonly name: string;
  readonly header: WireFrameHeader;
  readonly samples: readonly number[];
  readonly hex: string;
}

export interface RejectedVector {
  readonly name: string;
  readonly header: WireFrameHeader;
  readonly field: string;
}

const file = JSON.parse(readFileSync(new URL('./wire-vectors.json', import.meta.url), 'utf8')) as {
  frames: FrameVector[];
  rejected: RejectedVector[];
};

export const frameVectors: readonly FrameVector[] = file.frames;
export const rejectedVectors: readonly RejectedVector[] = file.rejected;

/** The `frame …` command line of tools/firmware/wire_vectors.c for a header and its samples. */
export function firmwareFrameCommand(header: WireFrameHeader, samples: readonly number[]): string {
  const flags =
    (header.sampleRateHz === undefined ? 0 : 1) |
    (header.timestampUs === undefined ? 0 : 2) |
    (header.sampleCounter === undefined ? 0 : 4) |
    (header.edges === undefined ? 0 : 8) |
    (header.channelLayout === undefined ? 0 : 16);
  const edges = header.edges ?? [];
  return [
    'frame',
    header.sequence,
    header.channelCount,
    header.samplesPerFrame,
    flags,
    header.sampleRateHz ?? 0,
    header.timestampUs ?? 0,
    header.sampleCounter ?? 0,
    header.channelLayout === undefined ? 0 : layoutField(header.channelLayout),
    edges.length,
    ...samples,
    ...edges.flatMap((edge) => [edge.sample, edge.lead, edge.line, edge.rising ? 1 : 0]),
  ].join(' ');
}

/** The packed layout field; a layout the encoder refuses is sent as its plain nibbles, for the C encoder to refuse too. */
function layoutField(outputs: readonly number[]): number {
  try {
    return packChannelLayout(outputs);
  } catch {
    return outputs.reduce((packed, count, k) => packed + (count & 15) * 16 ** k, 0);
  }
}

export function hexToBytes(hex: string): Uint8Array {
  return Uint8Array.from(Buffer.from(hex, 'hex'));
}
