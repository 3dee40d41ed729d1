import { describe, expect, it } from 'vitest';
import { crc32c, createWireDecoder, type SampleBlock } from '../../src/io/wire/index.js';
import { collectingDecoder } from './collect.js';
import { concat, frameBytes, syntheticFrame } from './frames.js';

const noop = () => undefined;

describe('createWireDecoder options', () => {
  it.each([
    [{ maxSamplesPerFrame: 0 }, 'maxSamplesPerFrame must be an integer in 1..4096 (got 0)'],
    [{ maxSamplesPerFrame: 4097 }, 'maxSamplesPerFrame must be an integer in 1..4096 (got 4097)'],
    [{ maxSamplesPerFrame: 1.5 }, 'maxSamplesPerFrame must be an integer in 1..4096 (got 1.5)'],
    [{ maxChannels: 18 }, 'maxChannels must be an integer in 2..16 (got 18)'],
  ])('rejects %o', (options, message) => {
    expect(() => createWireDecoder({ ...options, onFrame: noop, onGap: noop })).toThrow(message);
  });

  it('requires both callbacks', () => {
    expect(() => createWireDecoder({ onFrame: undefined as never, onGap: noop })).toThrow('onFrame must be a function (got undefined)');
    expect(() => createWireDecoder({ onFrame: noop, onGap: 5 as never })).toThrow('onGap must be a function (got 5)');
  });

  it('sizes its buffer for the largest allowed frame', () => {
    const decoder = createWireDecoder({ maxChannels: 4, maxSamplesPerFrame: 100, onFrame: noop, onGap: noop });
    // Fixed header, four u32 fields (rate, timestamp, counter, layout) and the edge count, samples, 256 edge records of 6 bytes, CRC.
    expect(decoder.config).toEqual({ maxChannels: 4, maxSamplesPerFrame: 100, bufferBytes: 10 + 18 + 4 * 100 * 2 + 256 * 6 + 4 });
  });

  it('admits by default the largest frame the format allows (4096 samples per frame)', () => {
    const decoder = createWireDecoder({ onFrame: noop, onGap: noop });
    expect(decoder.config.maxSamplesPerFrame).toBe(4096);
    const { decoder: collecting, frames } = collectingDecoder();
    collecting.push(syntheticFrame(0, 2, 4096));
    expect(frames.map((f) => f.samplesPerFrame)).toEqual([4096]);
  });
});

describe('wire decoder', () => {
  it('decodes consecutive frames with absolute sample indices and no gap', () => {
    const { decoder, frames, gaps } = collectingDecoder();
    expect(decoder.push(concat([syntheticFrame(10), syntheticFrame(11), syntheticFrame(12)]))).toBe(3);
    expect(frames.map((f) => [f.sequence, f.sampleIndex])).toEqual([[10, 0], [11, 4], [12, 8]]);
    expect(gaps).toEqual([]);
    expect(decoder.counters).toMatchObject({ framesGood: 3, crcFailures: 0, resyncs: 0, gaps: 0, bytesSkipped: 0 });
  });

  it('keeps a partial frame across chunks, one byte at a time', () => {
    const { decoder, frames } = collectingDecoder();
    const bytes = concat([syntheticFrame(1, 4, 3, { sampleRateHz: 5000, timestampUs: 77 }), syntheticFrame(2, 4, 3)]);
    let delivered = 0;
    for (const byte of bytes) delivered += decoder.push(Uint8Array.of(byte));
    expect(delivered).toBe(2);
    expect(frames[0]).toMatchObject({ sequence: 1, channelCount: 4, samplesPerFrame: 3, sampleRateHz: 5000, timestampUs: 77 });
    expect(frames[1]!.sampleRateHz).toBeNaN();
  });

  it('resynchronises after leading garbage and garbage between frames, counting skipped bytes', () => {
    const garbage = Uint8Array.of(0x00, 0xa5, 0x11, 0xa5, 0x5a, 0x07, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff);
    const { decoder, frames } = collectingDecoder();
    decoder.push(concat([garbage, syntheticFrame(0), garbage, syntheticFrame(1)]));
    expect(frames.map((f) => f.sequence)).toEqual([0, 1]);
    expect(decoder.counters.bytesSkipped).toBe(2 * garbage.length);
    expect(decoder.counters.resyncs).toBe(2);
    // The false marker `a5 5a 07` is rejected on its version byte.
    expect(decoder.counters.headerRejects).toBe(2);
  });

  it('drops a frame that fails the CRC and reports the gap it leaves', () => {
    const damaged = syntheticFrame(6);
    damaged[14] ^= 0x10;
    const { decoder, frames, gaps } = collectingDecoder();
    decoder.push(concat([syntheticFrame(5), damaged, syntheticFrame(7)]));
    expect(frames.map((f) => f.sequence)).toEqual([5, 7]);
    expect(decoder.counters.crcFailures).toBe(1);
    // Indices count the lost samples: frame 7 starts at 4 delivered + 4 lost.
    expect(gaps).toEqual([{ sampleIndex: 8, kind: 'loss', lostFrames: 1, lostSamples: 4, expectedSequence: 6, receivedSequence: 7 }]);
    expect(frames.map((f) => f.sampleIndex)).toEqual([0, 8]);
    expect(decoder.counters).toMatchObject({ gaps: 1, lostSamples: 4 });
  });

  it('counts the sequence wrap 65535 → 0 as no gap', () => {
    const { frames, gaps, decoder } = collectingDecoder();
    decoder.push(concat([syntheticFrame(65534), syntheticFrame(65535), syntheticFrame(0), syntheticFrame(1)]));
    expect(frames).toHaveLength(4);
    expect(gaps).toEqual([]);
  });

  it('measures a gap across the wrap: expected 65535, got 2 → 3 frames lost', () => {
    const { gaps, decoder } = collectingDecoder();
    decoder.push(concat([syntheticFrame(65534, 2, 8), syntheticFrame(2, 2, 8)]));
    expect(gaps).toEqual([{ sampleIndex: 32, kind: 'loss', lostFrames: 3, lostSamples: 24, expectedSequence: 65535, receivedSequence: 2 }]);
  });

  it('rejects frames beyond its limits as bad headers, keeps going, and tells the sizes it refused', () => {
    const { decoder, frames } = collectingDecoder({ maxChannels: 2, maxSamplesPerFrame: 4 });
    decoder.push(concat([syntheticFrame(0, 4, 2), syntheticFrame(1, 2, 5), syntheticFrame(2, 2, 4)]));
    expect(frames.map((f) => f.sequence)).toEqual([2]);
    expect(decoder.counters.headerRejects).toBeGreaterThanOrEqual(2);
    expect(decoder.counters).toMatchObject({ oversizeHeaders: 2, oversizeSamplesPerFrame: 5, oversizeChannels: 4 });
  });

  it('version 3: hands out the channel layout; a layout that contradicts the channel count is a bad header', () => {
    const good = syntheticFrame(0, 3, 4, { channelLayout: [3] });
    const { decoder, frames } = collectingDecoder();
    decoder.push(good);
    expect(frames.map((f) => [f.channelCount, f.channelLayout])).toEqual([[3, 3]]);
    // The block carries the outputs per axis too, so it goes into createAxes as it is.
    let outputs: readonly number[] | undefined;
    const direct = createWireDecoder({ onFrame: (block) => (outputs = block.axisOutputs), onGap: noop });
    direct.push(good);
    expect(outputs).toEqual([3]);
    // The layout field is the last optional field, just before the samples (no other field here: offset 10).
    for (const layout of [4, 0x23, 5, 0x30]) {
      const bad = syntheticFrame(1, 3, 4, { channelLayout: [3] });
      bad[10] = layout;
      const { decoder: fresh, frames: none } = collectingDecoder();
      fresh.push(bad);
      expect(none, `layout 0x${layout.toString(16)}`).toEqual([]);
      expect(fresh.counters.headerRejects).toBe(1);
    }
  });

  it('rejects unknown flag bits, versions and sample formats', () => {
    // Version 4 does not exist; format 2 is reserved; flag bit 2 (the sample counter) is version 2 and up, bit 4
    // (the channel layout) version 3; three channels need a layout.
    for (const [offset, value] of [[2, 4], [3, 2], [5, 4], [5, 16], [4, 3]] as const) {
      const frame = syntheticFrame(0);
      frame[offset] = value;
      const { decoder, frames } = collectingDecoder();
      decoder.push(frame);
      expect(frames).toEqual([]);
      expect(decoder.counters.headerRejects).toBe(1);
    }
  });

  it('reads version 2 edges as times from the block start, and drops edge records out of range', () => {
    const edges = [
      { sample: 0, lead: 16384, line: 0, rising: true }, // a quarter period before sample 0: t = −0.25
      { sample: 2, lead: 0, line: 1, rising: false }, // at sample 2
      { sample: 3, lead: 1, line: 2, rising: true },
    ];
    const frame = frameBytes({ sequence: 0, channelCount: 2, samplesPerFrame: 4, edges }, new Array<number>(8).fill(0));
    // Make the third record name line 9 (beyond 7) and re-seal the frame, as a faulty firmware would send it.
    const recordAt = frame.length - 4 - 6;
    frame[recordAt + 4] = 9;
    const crc = crc32c(frame, 0, frame.length - 4);
    frame.set([crc & 0xff, (crc >>> 8) & 0xff, (crc >>> 16) & 0xff, crc >>> 24], frame.length - 4);
    const { decoder, frames } = collectingDecoder();
    decoder.push(frame);
    expect(frames[0]!.edges).toEqual([[-0.25, 0, 1], [2, 1, 0]]);
    expect(decoder.counters.edgeRejects).toBe(1);
  });

  it('flushPartial drops an unfinished frame but keeps the sequence expectation', () => {
    const { decoder, frames, gaps } = collectingDecoder();
    const cut = syntheticFrame(1);
    decoder.push(syntheticFrame(0));
    decoder.push(cut.subarray(0, 9));
    expect(decoder.flushPartial()).toBe(9);
    decoder.push(syntheticFrame(4));
    expect(frames.map((f) => f.sequence)).toEqual([0, 4]);
    expect(gaps[0]).toMatchObject({ lostFrames: 3, lostSamples: 12 });
    expect(decoder.counters.bytesSkipped).toBe(9);
  });

  it('reset() behaves like a new decoder', () => {
    const input = concat([Uint8Array.of(1, 2, 3), syntheticFrame(3), syntheticFrame(9)]);
    const fresh = collectingDecoder();
    fresh.decoder.push(input);
    const used = collectingDecoder();
    used.decoder.push(concat([syntheticFrame(100), syntheticFrame(200).subarray(0, 7)]));
    used.decoder.reset();
    used.frames.length = 0;
    used.gaps.length = 0;
    used.decoder.push(input);
    expect(used.frames).toEqual(fresh.frames);
    expect(used.gaps).toEqual(fresh.gaps);
    expect({ ...used.decoder.counters }).toEqual({ ...fresh.decoder.counters });
  });

  it('hands out the same block object and samples view for frames of one size (no allocation per frame)', () => {
    const blocks: SampleBlock[] = [];
    const views: Int16Array[] = [];
    const decoder = createWireDecoder({
      onFrame: (block) => {
        blocks.push(block);
        views.push(block.samples);
      },
      onGap: noop,
    });
    decoder.push(concat([syntheticFrame(0), syntheticFrame(1), syntheticFrame(2)]));
    expect(new Set(blocks).size).toBe(1);
    expect(new Set(views).size).toBe(1);
    expect(views[0]!.length).toBe(8);
  });

  it('never throws on an empty chunk and counts every byte in', () => {
    const { decoder } = collectingDecoder();
    expect(decoder.push(new Uint8Array(0))).toBe(0);
    decoder.push(frameBytes({ sequence: 0, channelCount: 2, samplesPerFrame: 1 }, [3, 4]));
    expect(decoder.counters.bytesIn).toBe(18);
  });
});
