// The link reader: byte source events → gap-aware blocks. Properties: any chunking of the same bytes gives the
// same samples and gaps; an outage at any byte, losing any run of bytes, gives exactly the frames it did not
// touch and one gap of at least one sample where the link returned. Frames are invented (tests/wire/frames.ts).
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { createLinkReader, type LinkGap } from '../../src/io/live/index.js';
import type { ByteSourceEvent, LinkEvent } from '../../src/io/serial/index.js';
import { concat, frameBytes, syntheticFrame } from '../wire/frames.js';

const up = (gap: boolean): LinkEvent => ({ kind: 'link', state: 'up', timeMs: 0, reason: 'opened', gap, attempt: 0 });
const down: LinkEvent = { kind: 'link', state: 'down', timeMs: 0, reason: 'disconnected', gap: false, attempt: 0 };

interface Read {
  samples: number[];
  gaps: { sampleIndex: number; lostSamples: number; cause: string }[];
  /** Each block's first index and gap, and whether it continued the previous block's indices. */
  contiguous: boolean;
  nextSampleIndex: number;
}

function read(events: readonly ByteSourceEvent[], options: { mode?: 'binary' | 'text'; rateHz?: number; channelCount?: number } = {}): Read {
  const result: Read = { samples: [], gaps: [], contiguous: true, nextSampleIndex: 0 };
  let expected = 0;
  const reader = createLinkReader({
    ...options,
    onBlock(block) {
      expected += block.gapBefore;
      if (block.sampleIndex !== expected) result.contiguous = false;
      expected += block.samplesPerFrame;
      result.samples.push(...block.samples.subarray(0, block.samplesPerFrame * block.channelCount));
    },
    onGap: (gap: LinkGap) => result.gaps.push({ sampleIndex: gap.sampleIndex, lostSamples: gap.lostSamples, cause: gap.cause }),
  });
  for (const event of events) reader.push(event);
  result.nextSampleIndex = reader.status.nextSampleIndex;
  return result;
}

/** Splits bytes at the given cut points (any order, duplicates allowed). */
function chunked(bytes: Uint8Array, cuts: readonly number[]): Uint8Array[] {
  const points = [...new Set(cuts.map((cut) => cut % (bytes.length + 1)))].sort((a, b) => a - b);
  const chunks: Uint8Array[] = [];
  let from = 0;
  for (const point of [...points, bytes.length]) {
    chunks.push(bytes.subarray(from, point));
    from = point;
  }
  return chunks;
}

const SPF = 4;
const CHANNELS = 4;

/** Frames with a sequence that may jump: `skips[k]` frames are never sent before frame k. */
function stream(skips: readonly number[]) {
  const frames: { sequence: number; bytes: Uint8Array; start: number; samples: number[] }[] = [];
  let sequence = 0;
  let start = 0;
  for (const skip of skips) {
    sequence = (sequence + skip) % 65536;
    const bytes = syntheticFrame(sequence, CHANNELS, SPF, { sampleRateHz: 50_000 });
    // The values syntheticFrame writes.
    const samples = Array.from({ length: CHANNELS * SPF }, (_, i) => ((sequence * 997 + i * 131) % 65536) - 32768);
    frames.push({ sequence, bytes, start, samples });
    start += bytes.length;
    sequence = (sequence + 1) % 65536;
  }
  return { frames, bytes: concat(frames.map((frame) => frame.bytes)) };
}

/** What the reader must give for the frames delivered, an outage (if any) just before frame `afterOutage`. */
function model(delivered: readonly { sequence: number; samples: number[] }[], outageBefore: number | null): Read {
  const result: Read = { samples: [], gaps: [], contiguous: true, nextSampleIndex: 0 };
  let index = 0;
  delivered.forEach((frame, k) => {
    const previous = delivered[k - 1];
    const lostFrames = previous === undefined ? 0 : (frame.sequence - previous.sequence - 1 + 65536) % 65536;
    const outage = outageBefore === k;
    const lost = outage ? Math.max(1, lostFrames * SPF) : lostFrames * SPF;
    if (lost > 0) {
      index += lost;
      result.gaps.push({ sampleIndex: index, lostSamples: lost, cause: outage ? 'link' : 'sequence' });
    }
    result.samples.push(...frame.samples);
    index += SPF;
  });
  result.nextSampleIndex = index;
  return result;
}

const skipsArbitrary = fc.array(fc.oneof({ weight: 4, arbitrary: fc.constant(0) }, { weight: 1, arbitrary: fc.integer({ min: 1, max: 5 }) }), { minLength: 1, maxLength: 10 });

describe('createLinkReader', () => {
  it('gives the same samples and gaps for any chunking of the same bytes', () => {
    fc.assert(
      fc.property(skipsArbitrary, fc.array(fc.nat(), { maxLength: 20 }), (skips, cuts) => {
        const { frames, bytes } = stream(skips);
        const expected = model(frames, null);
        expect(read([up(false), ...chunked(bytes, cuts)])).toEqual(expected);
      }),
    );
  });

  // Listen's chunks hold n or n + 1 frames, so block lengths alternate; a view per block was an allocation per block.
  it('hands out one view per block length, exactly the block long, also across lengths that alternate and a grown buffer', () => {
    const { frames } = stream(Array.from({ length: 1200 }, () => 0));
    const reader = createLinkReader({
      onBlock(block) {
        views.push(block.samples);
        blocks.push({ length: block.samples.length, values: [...block.samples] });
      },
    });
    const views: Int16Array[] = [];
    const blocks: { length: number; values: number[] }[] = [];
    reader.push(up(false));
    // Chunks of 3, 4, 3, 4, … frames, then 1000 frames at once (past the first buffer of 4096 values), then 4, 3 again.
    const sizes = [3, 4, 3, 4, 3, 4, 1000, 4, 3, 4, 3];
    let next = 0;
    const expected: number[][] = [];
    for (const size of sizes) {
      const chunk = frames.slice(next, next + size);
      next += size;
      reader.push(concat(chunk.map((frame) => frame.bytes)));
      expected.push(chunk.flatMap((frame) => frame.samples));
    }
    expect(blocks).toEqual(expected.map((values) => ({ length: values.length, values })));
    // Two views before the buffer grew (3 and 4 frames), one for the 1000 frames, two after it (none of the old buffer).
    expect(new Set(views.slice(0, 6)).size).toBe(2);
    expect(new Set(views).size).toBe(5);
    expect(views[7]!.buffer).toBe(views[6]!.buffer);
    expect(views[7]!.buffer).not.toBe(views[0]!.buffer);
  });

  it('after an outage losing any run of bytes, gives the untouched frames and a gap of at least one sample', () => {
    fc.assert(
      fc.property(skipsArbitrary, fc.nat(), fc.nat(), fc.array(fc.nat(), { maxLength: 8 }), (skips, a, b, cuts) => {
        const { frames, bytes } = stream(skips);
        const lostFrom = a % (bytes.length + 1);
        const lostTo = lostFrom + (b % (bytes.length - lostFrom + 1));
        const before = frames.filter((frame) => frame.start + frame.bytes.length <= lostFrom);
        const after = frames.filter((frame) => frame.start >= lostTo);
        const expected = model([...before, ...after], after.length > 0 ? before.length : null);
        const events: ByteSourceEvent[] = [
          up(false),
          ...chunked(bytes.subarray(0, lostFrom), cuts),
          down,
          up(true),
          ...chunked(bytes.subarray(lostTo), cuts),
        ];
        expect(read(events)).toEqual(expected);
      }),
    );
  });

  it('spoils a text line cut by an outage instead of joining its halves, and counts one lost sample', () => {
    const encode = (text: string) => new TextEncoder().encode(text);
    const result = read([up(false), encode('1,2\n3,'), down, up(true), encode('4\n5,6\n')], { mode: 'text', rateHz: 1000 });
    // "3," + "4" would read as the sample (3, 4); it is rejected, and the outage counts one sample lost.
    expect(result.samples).toEqual([1, 2, 5, 6]);
    expect(result.gaps).toEqual([{ sampleIndex: 2, lostSamples: 1, cause: 'link' }]);
  });

  it('takes the rate from the frames, and refuses a contradiction with the option or a change', () => {
    const frame = (sequence: number, sampleRateHz?: number) => syntheticFrame(sequence, 2, 4, sampleRateHz === undefined ? {} : { sampleRateHz });
    const rates: number[] = [];
    const reader = createLinkReader({ onBlock: (block) => rates.push(block.rateHz) });
    reader.push(frame(0, 48_000));
    expect(rates).toEqual([48_000]);
    expect(reader.status).toMatchObject({ rateHz: 48_000, rateSource: 'frames', channelCount: 2, samplesDelivered: 4 });
    expect(() => reader.push(frame(1, 44_100))).toThrow('the sample rate in the frames changed from 48000 Hz to 44100 Hz at sample 4');
    const disagreeing = createLinkReader({ rateHz: 10_000, onBlock: () => undefined });
    expect(() => disagreeing.push(frame(0, 48_000))).toThrow("the frames say 48000 Hz but rateHz is 10000 Hz; give the device's true rate or leave it out");
    const bare = createLinkReader({ onBlock: () => undefined });
    expect(() => bare.push(frame(0))).toThrow('the frames carry no sample rate field: give rateHz');
    const given = createLinkReader({ rateHz: 10_000, onBlock: (block) => rates.push(block.rateHz) });
    given.push(frame(0));
    expect(rates.at(-1)).toBe(10_000);
    expect(given.status.rateSource).toBe('option');
  });

  it('a repeated frame is dropped; a counter that restarts is a gap of unknown length marked as 1 sample', () => {
    const frame = (sequence: number) => syntheticFrame(sequence, 2, 64, { sampleRateHz: 50_000 });
    const reader = createLinkReader({ onBlock: () => undefined, onGap: (gap) => gaps.push(gap) });
    const gaps: LinkGap[] = [];
    reader.push(concat([frame(100), frame(101), frame(101), frame(102), frame(0), frame(1)]));
    // The repeat: no gap and not 65 535 frames lost; the restart: one gap, cause resync, index advanced by 1.
    expect(gaps).toEqual([{ kind: 'gap', sampleIndex: 3 * 64 + 1, lostSamples: 1, cause: 'resync' }]);
    expect(reader.status).toMatchObject({ samplesDelivered: 5 * 64, nextSampleIndex: 5 * 64 + 1, gaps: 1, resyncs: 1 });
    expect(reader.status.wire).toMatchObject({ duplicates: 1, sequenceResyncs: 1 });
  });

  it('hands out the edges of the frames in absolute sample time, gaps counted', () => {
    const edgeFrame = (sequence: number, edges: { sample: number; lead: number; line: number; rising: boolean }[]) =>
      frameBytes({ sequence, channelCount: 2, samplesPerFrame: 4, sampleRateHz: 1000, edges }, new Array<number>(8).fill(sequence));
    const seen: [number, number, number][] = [];
    const reader = createLinkReader({
      onBlock(block) {
        for (let e = 0; e < block.edgeCount; e++) seen.push([block.edgeTime[e]!, block.edgeLine[e]!, block.edgeRising[e]!]);
      },
    });
    // Frames 0 and 1 in one chunk (indices 0..7); frame 2 lost (8..11); frame 3 holds indices 12..15.
    reader.push(concat([edgeFrame(0, [{ sample: 1, lead: 32768, line: 0, rising: true }]), edgeFrame(1, [{ sample: 0, lead: 16384, line: 1, rising: false }])]));
    reader.push(edgeFrame(3, [{ sample: 3, lead: 0, line: 0, rising: false }]));
    expect(seen).toEqual([[0.5, 0, 1], [3.75, 1, 0], [15, 0, 0]]);
  });

  it('admits by default the largest frame the format allows', () => {
    const samples: number[] = [];
    const reader = createLinkReader({ rateHz: 1000, onBlock: (block) => samples.push(block.samplesPerFrame) });
    reader.push(syntheticFrame(0, 2, 4096));
    expect(samples).toEqual([4096]);
  });

  it('checks its options once, naming the option', () => {
    const onBlock = () => undefined;
    expect(() => createLinkReader({ mode: 'text', onBlock })).toThrow('rateHz must be given in text mode (lines carry no sample rate) (got undefined)');
    expect(() => createLinkReader({ maxSamplesPerFrame: 4097, onBlock })).toThrow('maxSamplesPerFrame must be an integer in 1..4096 (got 4097)');
    expect(() => createLinkReader({ mode: 'text', rateHz: 1, channelCount: 3, onBlock })).toThrow('channelCount must be even (got 3)');
    expect(() => createLinkReader({ rateHz: -1, onBlock })).toThrow('rateHz must be a positive finite number (got -1)');
  });

  it('starts over on reset', () => {
    const reader = createLinkReader({ onBlock: () => undefined });
    reader.push(up(false));
    reader.push(syntheticFrame(0, 2, 4, { sampleRateHz: 1000 }));
    reader.push(syntheticFrame(3, 2, 4, { sampleRateHz: 1000 }));
    expect(reader.status).toMatchObject({ link: 'up', gaps: 1, lostSamples: 8, nextSampleIndex: 16 });
    reader.reset();
    expect(reader.status).toMatchObject({ link: 'waiting', gaps: 0, lostSamples: 0, nextSampleIndex: 0, rateSource: null });
    expect(reader.status.wire).toMatchObject({ framesGood: 0 });
  });
});
