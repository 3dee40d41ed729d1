// Property tests of the wire decoder against random bytes, random chunking and damage (fast-check).
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { createWireCrcKernel, type WireCrcKernel } from '../../src/accel/wire-crc.js';
import { WIRE_SYNC_0, wireFrameLength, wireMaxFrameLength, type WireFrameHeader } from '../../src/io/wire/index.js';
import { collectingDecoder, type CopiedBlock } from './collect.js';
import { concat, frameBytes } from './frames.js';

const LIMITS = { maxChannels: 4, maxSamplesPerFrame: 8 } as const;

interface SentFrame {
  header: WireFrameHeader;
  samples: number[];
  bytes: Uint8Array;
}

const edgeArbitrary = (samplesPerFrame: number) =>
  fc.record({
    sample: fc.integer({ min: 0, max: samplesPerFrame - 1 }),
    lead: fc.integer({ min: 0, max: 65535 }),
    line: fc.integer({ min: 0, max: 7 }),
    rising: fc.boolean(),
  });

const frameArbitrary = (sequence: number) =>
  fc
    .record({
      channelCount: fc.constantFrom(2, 4),
      samplesPerFrame: fc.integer({ min: 1, max: LIMITS.maxSamplesPerFrame }),
      sampleRateHz: fc.option(fc.integer({ min: 1, max: 0xffffffff }), { nil: undefined }),
      timestampUs: fc.option(fc.integer({ min: 0, max: 0xffffffff }), { nil: undefined }),
    })
    .chain((shape) =>
      fc.tuple(
        fc.array(fc.integer({ min: -32768, max: 32767 }), {
          minLength: shape.channelCount * shape.samplesPerFrame,
          maxLength: shape.channelCount * shape.samplesPerFrame,
        }),
        fc.option(fc.array(edgeArbitrary(shape.samplesPerFrame), { maxLength: 3 }), { nil: undefined }),
      ).map(([samples, edges]): SentFrame => {
        const header = { sequence, ...shape, edges };
        return { header, samples, bytes: frameBytes(header, samples) };
      }),
    );

/**
 * Consecutive frames from a random start sequence (so some runs cross the 65535 → 0 wrap); in some runs every
 * frame carries a sample counter that advances by its samples (and may cross 2^32).
 */
const framesArbitrary = (minLength: number, maxLength: number) =>
  fc
    .tuple(
      fc.integer({ min: 0, max: 65535 }),
      fc.integer({ min: minLength, max: maxLength }),
      fc.option(fc.integer({ min: 0, max: 0xffffffff }), { nil: undefined }),
    )
    .chain(([start, count, counterStart]) =>
      fc.tuple(...Array.from({ length: count }, (_, i) => frameArbitrary((start + i) % 65536))).map((frames) => {
        if (counterStart === undefined) return frames;
        let counter = counterStart;
        return frames.map((frame): SentFrame => {
          const header = { ...frame.header, sampleCounter: counter };
          counter = (counter + header.samplesPerFrame) % 2 ** 32;
          return { header, samples: frame.samples, bytes: frameBytes(header, frame.samples) };
        });
      }),
    );

/** Cuts `bytes` at the given fractions into chunks (some may be empty). */
function split(bytes: Uint8Array, cuts: readonly number[]): Uint8Array[] {
  const points = [...new Set(cuts.map((c) => Math.floor(c * (bytes.length + 1))))].sort((a, b) => a - b);
  const chunks: Uint8Array[] = [];
  let previous = 0;
  for (const point of points) {
    chunks.push(bytes.slice(previous, point));
    previous = point;
  }
  chunks.push(bytes.slice(previous));
  return chunks;
}
const cutsArbitrary = fc.array(fc.double({ min: 0, max: 1, maxExcluded: true, noNaN: true }), { maxLength: 12 });

function matches(frame: CopiedBlock, sent: SentFrame): boolean {
  return (
    frame.sequence === sent.header.sequence &&
    frame.channelCount === sent.header.channelCount &&
    frame.samplesPerFrame === sent.header.samplesPerFrame &&
    Object.is(frame.sampleRateHz, sent.header.sampleRateHz ?? Number.NaN) &&
    Object.is(frame.timestampUs, sent.header.timestampUs ?? Number.NaN) &&
    Object.is(frame.sampleCounter, sent.header.sampleCounter ?? Number.NaN) &&
    JSON.stringify(frame.edges) === JSON.stringify((sent.header.edges ?? []).map((e) => [e.sample - e.lead / 65536, e.line, e.rising ? 1 : 0])) &&
    frame.samples.length === sent.samples.length &&
    frame.samples.every((value, i) => value === sent.samples[i])
  );
}

/** Each decoded frame equals a sent frame, in sending order. */
function isSubsequence(decoded: readonly CopiedBlock[], sent: readonly SentFrame[]): boolean {
  let at = 0;
  for (const frame of decoded) {
    while (at < sent.length && !matches(frame, sent[at]!)) at++;
    if (at === sent.length) return false;
    at++;
  }
  return true;
}

function decodeChunks(chunks: readonly Uint8Array[], crcKernel?: (byteCapacity: number) => WireCrcKernel | null) {
  const collector = collectingDecoder(LIMITS, crcKernel);
  for (const chunk of chunks) collector.decoder.push(chunk);
  return collector;
}

describe('wire decoder properties', () => {
  it('random bytes in random chunks never throw and never yield a frame', () => {
    fc.assert(
      fc.property(fc.uint8Array({ maxLength: 2000 }), cutsArbitrary, (bytes, cuts) => {
        const { decoder, frames } = decodeChunks(split(bytes, cuts));
        expect(frames).toEqual([]);
        expect(decoder.counters.bytesIn).toBe(bytes.length);
        expect(decoder.counters.bytesSkipped).toBeLessThanOrEqual(bytes.length);
      }),
      { numRuns: 300 },
    );
  });

  it('frames mixed with random garbage, randomly chunked, yield only frames that were sent, in order', () => {
    fc.assert(
      fc.property(
        framesArbitrary(1, 6),
        fc.array(fc.uint8Array({ maxLength: 40 }), { minLength: 7, maxLength: 7 }),
        cutsArbitrary,
        (sent, garbage, cuts) => {
          const parts: Uint8Array[] = [];
          sent.forEach((frame, i) => parts.push(garbage[i]!, frame.bytes));
          parts.push(garbage[6]!);
          const { frames } = decodeChunks(split(concat(parts), cuts));
          expect(isSubsequence(frames, sent)).toBe(true);
        },
      ),
      { numRuns: 300 },
    );
  });

  it('with garbage free of the first sync byte, every frame comes through and no gap is reported', () => {
    fc.assert(
      fc.property(
        framesArbitrary(1, 6),
        fc.array(fc.uint8Array({ maxLength: 40 }).map((g) => g.map((b) => (b === WIRE_SYNC_0 ? 0 : b))), {
          minLength: 6,
          maxLength: 6,
        }),
        cutsArbitrary,
        (sent, garbage, cuts) => {
          const parts = sent.flatMap((frame, i) => [garbage[i]!, frame.bytes]);
          const { frames, gaps, decoder } = decodeChunks(split(concat(parts), cuts));
          expect(frames).toHaveLength(sent.length);
          frames.forEach((frame, i) => expect(matches(frame, sent[i]!)).toBe(true));
          expect(gaps).toEqual([]);
          expect(decoder.counters.bytesSkipped).toBe(garbage.slice(0, sent.length).reduce((sum, g) => sum + g.length, 0));
        },
      ),
      { numRuns: 300 },
    );
  });

  // The first frame is never damaged: without a frame before it, nothing can tell that one is missing.
  it('one damaged byte loses exactly its frame and reports one frame lost', () => {
    fc.assert(
      fc.property(
        framesArbitrary(2, 5),
        fc.nat(),
        fc.nat(),
        fc.integer({ min: 1, max: 255 }),
        (sent, frameChoice, byteChoice, flip) => {
          const damagedIndex = 1 + (frameChoice % (sent.length - 1));
          const damaged = sent[damagedIndex]!.bytes.slice();
          damaged[byteChoice % damaged.length] ^= flip;
          // Largest-size frames behind the damage, more bytes than the largest frame (a damaged edge count can
          // claim 256 edges): a false length read from it ends inside the stream.
          const last = sent[sent.length - 1]!.header.sequence;
          const tailCount = Math.ceil(wireMaxFrameLength(LIMITS.maxChannels, LIMITS.maxSamplesPerFrame) / wireFrameLength(4, 8, 0)) + 1;
          const tail = Array.from({ length: tailCount }, (_, i) => i + 1).map((k) => {
            const header = { sequence: (last + k) % 65536, channelCount: 4, samplesPerFrame: 8 };
            const samples = Array.from({ length: 32 }, (_, i) => i - k * 100);
            return { header, samples, bytes: frameBytes(header, samples) };
          });
          const all = [...sent, ...tail];
          const stream = concat(all.map((frame, i) => (i === damagedIndex ? damaged : frame.bytes)));
          const { frames, gaps } = decodeChunks([stream]);
          const expected = all.filter((_, i) => i !== damagedIndex);
          expect(frames).toHaveLength(expected.length);
          frames.forEach((frame, i) => expect(matches(frame, expected[i]!)).toBe(true));
          expect(gaps).toHaveLength(1);
          expect(gaps[0]).toMatchObject({ kind: 'loss', lostFrames: 1 });
          // The sample counter, when the frames on both sides carry one, counts the damaged frame's own samples.
          const after: WireFrameHeader = all[damagedIndex + 1]!.header;
          const countedBy = after.sampleCounter !== undefined ? all[damagedIndex]! : all[damagedIndex + 1]!;
          expect(gaps[0]!.lostSamples).toBe(countedBy.header.samplesPerFrame);
        },
      ),
      { numRuns: 300 },
    );
  });

  it('same frames, gaps and counters whether the stream comes in one chunk or random chunks', () => {
    fc.assert(
      fc.property(framesArbitrary(1, 5), fc.uint8Array({ maxLength: 30 }), cutsArbitrary, (sent, noise, cuts) => {
        const stream = concat([noise, ...sent.map((f) => f.bytes), noise]);
        const whole = decodeChunks([stream]);
        const chunked = decodeChunks(split(stream, cuts));
        expect(chunked.frames).toEqual(whole.frames);
        expect(chunked.gaps).toEqual(whole.gaps);
        expect({ ...chunked.decoder.counters }).toEqual({ ...whole.decoder.counters });
      }),
      { numRuns: 300 },
    );
  });
});

describe('frames split at every boundary', () => {
  const stream = concat([
    frameBytes({ sequence: 65535, channelCount: 2, samplesPerFrame: 3, sampleRateHz: 250000 }, [1, -1, 2, -2, 3, -3]),
    frameBytes({ sequence: 0, channelCount: 4, samplesPerFrame: 2, timestampUs: 0xfffffffe }, [5, 6, 7, 8, -5, -6, -7, -8]),
    Uint8Array.of(0xa5, 0x5a, 0x01),
    frameBytes({ sequence: 2, channelCount: 2, samplesPerFrame: 1 }, [-32768, 32767]),
  ]);
  const reference = decodeChunks([stream]);

  it('the reference decode sees all three frames and one gap', () => {
    expect(reference.frames.map((f) => f.sequence)).toEqual([65535, 0, 2]);
    expect(reference.gaps).toHaveLength(1);
  });

  it('decodes the same for every single cut', () => {
    for (let cut = 0; cut <= stream.length; cut++) {
      const result = decodeChunks([stream.subarray(0, cut), stream.subarray(cut)]);
      expect(result.frames, `cut at ${cut}`).toEqual(reference.frames);
      expect(result.gaps, `cut at ${cut}`).toEqual(reference.gaps);
    }
  });

  it('decodes the same for every pair of cuts', () => {
    for (let first = 0; first <= stream.length; first++) {
      for (let second = first; second <= stream.length; second++) {
        const result = decodeChunks([stream.subarray(0, first), stream.subarray(first, second), stream.subarray(second)]);
        expect(result.frames.length).toBe(3);
        expect(result.frames).toEqual(reference.frames);
      }
    }
  });
});

// The decoder copies chunks into its own bytes and the samples out of them as bytes, at any alignment: frames must
// give the samples sent, from Buffers and from views into larger memory alike.
describe('large frames at any byte alignment', () => {
  it('decode to the samples sent, however the stream is cut, offset in memory or wrapped', () => {
    const largeFrame = (sequence: number) =>
      fc
        .record({ channelCount: fc.constantFrom(2, 4, 6), samplesPerFrame: fc.integer({ min: 16, max: 64 }) })
        .chain((shape) =>
          fc
            .array(fc.integer({ min: -32768, max: 32767 }), { minLength: shape.channelCount * shape.samplesPerFrame, maxLength: shape.channelCount * shape.samplesPerFrame })
            .map((samples): SentFrame => {
              const header = { sequence, ...shape, sampleRateHz: 1000 };
              return { header, samples, bytes: frameBytes(header, samples) };
            }),
        );
    fc.assert(
      fc.property(
        fc.tuple(largeFrame(0), largeFrame(1), largeFrame(2), largeFrame(3)),
        fc.uint8Array({ maxLength: 5 }).filter((noise) => !noise.includes(WIRE_SYNC_0)),
        cutsArbitrary,
        fc.nat({ max: 3 }),
        fc.constantFrom('view', 'buffer'),
        (sent, noise, cuts, offset, kind) => {
          const stream = concat([noise, ...sent.map((f) => f.bytes)]);
          const chunks = split(stream, cuts).map((chunk) => {
            // The chunk at `offset` bytes into a larger memory, as a port's pooled buffers hand it out.
            const memory = new Uint8Array(chunk.length + offset + 3);
            memory.set(chunk, offset);
            return kind === 'buffer' ? Buffer.from(memory.buffer, offset, chunk.length) : memory.subarray(offset, offset + chunk.length);
          });
          const collector = collectingDecoder({ maxChannels: 6, maxSamplesPerFrame: 64 });
          for (const chunk of chunks) collector.decoder.push(chunk);
          expect(collector.frames).toHaveLength(sent.length);
          collector.frames.forEach((frame, i) => expect(matches(frame, sent[i]!)).toBe(true));
          expect(collector.gaps).toEqual([]);
        },
      ),
      { numRuns: 200 },
    );
  });
});

/**
 * A stream of frames (some damaged, some repeated) with garbage between them: the decoder with the WebAssembly CRC
 * and with the JavaScript one (where WebAssembly is missing) report the same frames, gaps and counters.
 */
const streamArbitrary = fc
  .tuple(
    framesArbitrary(1, 8),
    fc.array(fc.uint8Array({ maxLength: 24 }), { minLength: 9, maxLength: 9 }),
    fc.array(fc.tuple(fc.nat(), fc.integer({ min: 1, max: 255 })), { maxLength: 3 }),
    fc.array(fc.nat(), { maxLength: 2 }),
  )
  .map(([sent, garbage, damage, repeats]) => {
    const frames = sent.map((frame) => frame.bytes.slice());
    for (const [choice, flip] of damage) {
      const frame = frames[choice % frames.length]!;
      frame[(choice >> 3) % frame.length] ^= flip;
    }
    for (const choice of repeats) frames.splice((choice % frames.length) + 1, 0, frames[choice % frames.length]!);
    return concat(frames.flatMap((bytes, i) => [garbage[i % garbage.length]!, bytes]));
  });

function sameAsJavaScript(crcKernel: (byteCapacity: number) => WireCrcKernel | null) {
  return fc.property(streamArbitrary, cutsArbitrary, (stream, cuts) => {
    const fast = decodeChunks(split(stream, cuts), crcKernel);
    const plain = decodeChunks(split(stream, cuts), () => null);
    expect(fast.frames).toEqual(plain.frames);
    expect(fast.gaps).toEqual(plain.gaps);
    expect({ ...fast.decoder.counters }).toEqual({ ...plain.decoder.counters });
  });
}

describe('the WebAssembly CRC in the decoder', () => {
  it('is there in this Node', () => {
    expect(createWireCrcKernel(100)).not.toBeNull();
  });

  it('gives the frames, gaps and counters of the JavaScript CRC, for any stream and chunking', () => {
    fc.assert(sameAsJavaScript(createWireCrcKernel), { numRuns: 300 });
  });

  it('a kernel that errs on some frames fails that comparison', () => {
    // Wrong for ranges of an odd length of 16-byte steps: some frames the plain decoder takes are refused.
    const broken = (byteCapacity: number): WireCrcKernel | null => {
      const kernel = createWireCrcKernel(byteCapacity)!;
      return { bytes: kernel.bytes, crc32c: (start, end) => (kernel.crc32c(start, end) ^ (((end - start) >> 4) & 1)) >>> 0 };
    };
    expect(fc.check(sameAsJavaScript(broken), { numRuns: 300 }).failed).toBe(true);
  });

  it('takes a chunk longer than its byte area in parts, with the results of small chunks', () => {
    // 3000 frames with garbage between them: about 280 kB in one chunk, against the 64 KiB taken in at once.
    const parts: Uint8Array[] = [];
    for (let i = 0; i < 3000; i++) {
      const header = { sequence: i % 65536, channelCount: 4, samplesPerFrame: 8, sampleRateHz: 1000 };
      const frame = frameBytes(header, Array.from({ length: 32 }, (_, k) => ((i * 31 + k * 977) % 65536) - 32768));
      if (i % 97 === 5) frame[20] ^= 0x40;
      parts.push(Uint8Array.of(i & 0xff, 0xa5, (i * 7) & 0xff), frame);
    }
    const stream = concat(parts);
    const whole = decodeChunks([stream]);
    const small = decodeChunks(split(stream, Array.from({ length: 400 }, (_, k) => (k + 0.5) / 400)));
    expect(whole.frames.length).toBeGreaterThan(2900);
    expect(whole.frames).toEqual(small.frames);
    expect(whole.gaps).toEqual(small.gaps);
    expect({ ...whole.decoder.counters }).toEqual({ ...small.decoder.counters });
  });
});
