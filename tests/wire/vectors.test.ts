// Shared vectors: the TypeScript encoder, the C encoder and the decoder must agree byte for byte.
import { readFileSync } from 'node:fs';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { axisOutputsOf, crc32c, encodeWireFrame, wireFrameLengthOf } from '../../src/io/wire/index.js';
import { collectingDecoder } from './collect.js';
import { buildFirmwareProgram, type FirmwareProgram } from './firmware-c.js';
import { firmwareFrameCommand, frameVectors, hexToBytes, rejectedVectors } from './vectors.js';

function encodeTs(vector: (typeof frameVectors)[number]): string {
  const out = new Uint8Array(wireFrameLengthOf(vector.header));
  const written = encodeWireFrame(vector.header, vector.samples, out);
  expect(written).toBe(out.length);
  return Buffer.from(out).toString('hex');
}

describe('wire layout', () => {
  it('matches a frame laid out by hand from the table in docs/wire-format.md', () => {
    // Two channels, two samples: x0=1, y0=-1, x1=-32768, y1=32767; sequence 0x1234; rate 1000 Hz.
    const body = [
      0xa5, 0x5a, // sync
      0x01, // version
      0x01, // sample format int16 LE
      0x02, // channel count
      0x01, // flags: sample rate present
      0x34, 0x12, // sequence 0x1234 LE
      0x02, 0x00, // samples per frame 2 LE
      0xe8, 0x03, 0x00, 0x00, // 1000 Hz LE
      0x01, 0x00, 0xff, 0xff, 0x00, 0x80, 0xff, 0x7f, // samples
    ];
    const bytes = Uint8Array.from(body);
    const crc = crc32c(bytes);
    const expected = Uint8Array.from([...body, crc & 0xff, (crc >>> 8) & 0xff, (crc >>> 16) & 0xff, crc >>> 24]);
    const header = { sequence: 0x1234, channelCount: 2, samplesPerFrame: 2, sampleRateHz: 1000 };
    const out = new Uint8Array(wireFrameLengthOf(header));
    encodeWireFrame(header, [1, -1, -32768, 32767], out);
    expect(Buffer.from(out).toString('hex')).toBe(Buffer.from(expected).toString('hex'));
  });
});

describe('docs/wire-format.md', () => {
  it('shows the bytes the encoder writes for its example frame', () => {
    const doc = readFileSync(new URL('../../docs/wire-format.md', import.meta.url), 'utf8');
    const example = /## Example frame[\s\S]*?```\n([0-9a-f ]+)\n```/.exec(doc);
    expect(example).not.toBeNull();
    const header = { sequence: 0x1234, channelCount: 2, samplesPerFrame: 2, sampleRateHz: 1000 };
    const out = new Uint8Array(wireFrameLengthOf(header));
    encodeWireFrame(header, [1, -1, -32768, 32767], out);
    expect(example![1]!.replace(/ /g, '')).toBe(Buffer.from(out).toString('hex'));
  });

  it('shows the bytes of the shared version 2 vector for its version 2 example', () => {
    const doc = readFileSync(new URL('../../docs/wire-format.md', import.meta.url), 'utf8');
    const example = /## Example frame, version 2[\s\S]*?```\n([0-9a-f ]+)\n```/.exec(doc);
    expect(example).not.toBeNull();
    const vector = frameVectors.find((v) => v.name.startsWith('version 2: rate, timestamp, counter and edges'))!;
    expect(example![1]!.replace(/ /g, '')).toBe(vector.hex);
    expect(encodeTs(vector)).toBe(vector.hex);
  });
});

describe('shared vectors', () => {
  let program: FirmwareProgram;
  beforeAll(() => {
    program = buildFirmwareProgram();
  });
  afterAll(() => program?.remove());

  it.each(frameVectors)('TypeScript encoder reproduces "$name"', (vector) => {
    expect(encodeTs(vector)).toBe(vector.hex);
  });

  it('C encoder reproduces every vector byte for byte', () => {
    const lines = program.run(frameVectors.map((v) => firmwareFrameCommand(v.header, v.samples)));
    expect(lines).toEqual(frameVectors.map((v) => v.hex));
  });

  it('decoder turns the C output back into the vectors, in one stream', () => {
    const lines = program.run(frameVectors.map((v) => firmwareFrameCommand(v.header, v.samples)));
    const { decoder, frames } = collectingDecoder({ maxChannels: 16, maxSamplesPerFrame: 16 });
    for (const line of lines) decoder.push(hexToBytes(line));
    expect(frames).toHaveLength(frameVectors.length);
    frames.forEach((frame, i) => {
      const { header, samples } = frameVectors[i]!;
      expect(frame.sequence).toBe(header.sequence);
      expect(frame.channelCount).toBe(header.channelCount);
      // Outputs of axis k in bits 4k..4k+3 (docs/wire-format.md, "Channel layout"); pairs when absent.
      expect(axisOutputsOf(frame.channelCount, frame.channelLayout)).toEqual(header.channelLayout ?? new Array(header.channelCount / 2).fill(2));
      expect(frame.samplesPerFrame).toBe(header.samplesPerFrame);
      expect(frame.sampleRateHz).toBe(header.sampleRateHz ?? Number.NaN);
      expect(frame.timestampUs).toBe(header.timestampUs ?? Number.NaN);
      expect(frame.sampleCounter).toBe(header.sampleCounter ?? Number.NaN);
      expect(frame.samples).toEqual(samples);
      // Edge time = sample − lead / 65536 sample periods (docs/wire-format.md, "Edge records").
      expect(frame.edges).toEqual((header.edges ?? []).map((e) => [e.sample - e.lead / 65536, e.line, e.rising ? 1 : 0]));
    });
    expect(decoder.counters.crcFailures + decoder.counters.headerRejects + decoder.counters.bytesSkipped).toBe(0);
  });

  it.each(rejectedVectors)('both encoders refuse "$name"', (vector) => {
    const zeros = new Array<number>(vector.header.channelCount * vector.header.samplesPerFrame).fill(0);
    const field = vector.field.replace(/[[\].]/g, '\\$&');
    expect(() => encodeWireFrame(vector.header, zeros, new Uint8Array(1 << 18))).toThrow(new RegExp(`^${field} must`));
    expect(program.run([firmwareFrameCommand(vector.header, zeros)])).toEqual(['error']);
  });

  it('both encoders refuse 257 edges in one frame and accept 256', () => {
    const edges = (count: number) => Array.from({ length: count }, (_, i) => ({ sample: i % 4, lead: i, line: 0, rising: true }));
    const header = (count: number) => ({ sequence: 0, channelCount: 2, samplesPerFrame: 4, edges: edges(count) });
    const zeros = new Array<number>(8).fill(0);
    expect(() => encodeWireFrame(header(257), zeros, new Uint8Array(4096))).toThrow('edges.length must be an integer in 0..256 (got 257)');
    const out = new Uint8Array(wireFrameLengthOf(header(256)));
    encodeWireFrame(header(256), zeros, out);
    expect(program.run([firmwareFrameCommand(header(257), zeros), firmwareFrameCommand(header(256), zeros)])).toEqual([
      'error',
      Buffer.from(out).toString('hex'),
    ]);
  });

  it('TypeScript encoder names the problem for bad samples and a short output buffer', () => {
    const header = { sequence: 0, channelCount: 2, samplesPerFrame: 1 };
    expect(() => encodeWireFrame(header, [0, 40000], new Uint8Array(64))).toThrow('samples[1] must be an int16 integer in -32768..32767 (got 40000)');
    expect(() => encodeWireFrame(header, [0], new Uint8Array(64))).toThrow('samples must hold channelCount × samplesPerFrame = 2 values (got 1)');
    expect(() => encodeWireFrame(header, [0, 0], new Uint8Array(10))).toThrow('out must have 18 bytes free at offset 0 (has 10)');
  });
});
