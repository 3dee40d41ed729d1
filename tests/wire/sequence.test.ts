// Sequence anomalies told apart from losses: repeated frames, counters that restart or jump backwards, and the
// version 2 sample counter that counts lost samples exactly when frame sizes differ.
// The half-range rule is serial-number arithmetic, RFC 1982 section 3.2 (published; section number from memory).
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { collectingDecoder } from './collect.js';
import { concat, frameBytes, syntheticFrame } from './frames.js';

describe('repeated frames', () => {
  it('drops a frame sent twice and counts it as a duplicate, not as 65 535 lost frames', () => {
    const { decoder, frames, gaps } = collectingDecoder();
    decoder.push(concat([syntheticFrame(5, 2, 64), syntheticFrame(6, 2, 64), syntheticFrame(6, 2, 64), syntheticFrame(7, 2, 64)]));
    expect(frames.map((f) => [f.sequence, f.sampleIndex])).toEqual([[5, 0], [6, 64], [7, 128]]);
    expect(gaps).toEqual([]);
    expect(decoder.counters).toMatchObject({ framesGood: 3, duplicates: 1, gaps: 0, lostSamples: 0 });
  });

  it('drops older frames sent again (a device replaying its last frames)', () => {
    const { decoder, frames, gaps } = collectingDecoder();
    decoder.push(concat([10, 11, 12, 10, 11, 12, 13].map((s) => syntheticFrame(s))));
    expect(frames.map((f) => f.sequence)).toEqual([10, 11, 12, 13]);
    expect(gaps).toEqual([]);
    expect(decoder.counters.duplicates).toBe(3);
  });

  it('a push that only repeats a frame delivers nothing', () => {
    const { decoder } = collectingDecoder();
    decoder.push(syntheticFrame(1));
    expect(decoder.push(syntheticFrame(1))).toBe(0);
  });
});

describe('counter restarts and backward jumps', () => {
  it('a counter that restarts is a resync of unknown length, and the stream goes on from there', () => {
    const { decoder, frames, gaps } = collectingDecoder();
    decoder.push(concat([syntheticFrame(5000), syntheticFrame(5001), syntheticFrame(0), syntheticFrame(1)]));
    // The resync's unknown length counts as one sample in the indices.
    expect(frames.map((f) => [f.sequence, f.sampleIndex])).toEqual([[5000, 0], [5001, 4], [0, 9], [1, 13]]);
    expect(gaps).toEqual([{ sampleIndex: 9, kind: 'resync', lostFrames: NaN, lostSamples: NaN, expectedSequence: 5002, receivedSequence: 0 }]);
    expect(decoder.counters).toMatchObject({ gaps: 1, sequenceResyncs: 1, lostSamples: 0 });
  });

  it('a frame with the same sequence but other content is a restart, not a duplicate', () => {
    const { decoder, gaps } = collectingDecoder();
    decoder.push(concat([syntheticFrame(3), syntheticFrame(4), syntheticFrame(4, 2, 5)]));
    expect(gaps.map((g) => g.kind)).toEqual(['resync']);
    expect(decoder.counters.duplicates).toBe(0);
  });

  it('forward jumps under half the counter range are losses; half the range or more are resyncs (RFC 1982)', () => {
    const jump = (received: number) => {
      const { decoder, gaps } = collectingDecoder();
      decoder.push(concat([syntheticFrame(0), syntheticFrame(received)]));
      return [gaps[0]!.kind, gaps[0]!.lostFrames];
    };
    // Expected 1: received 32768 is 32767 frames later; 32769 is 32768 ahead, i.e. taken as behind.
    expect(jump(32768)).toEqual(['loss', 32767]);
    expect(jump(32769)).toEqual(['resync', NaN]);
  });

  it('any stream of repeats, losses and restarts keeps the delivered frames and accounts for every anomaly', () => {
    // Each step: next frame, a repeat of one of the last frames, a loss of 1..100 frames, or a restart at 0.
    const step = fc.oneof(
      fc.constant({ kind: 'next' as const, n: 0 }),
      fc.record({ kind: fc.constant('repeat' as const), n: fc.integer({ min: 1, max: 16 }) }),
      fc.record({ kind: fc.constant('loss' as const), n: fc.integer({ min: 1, max: 100 }) }),
      fc.constant({ kind: 'restart' as const, n: 0 }),
    );
    fc.assert(
      fc.property(fc.integer({ min: 200, max: 65535 }), fc.array(step, { maxLength: 40 }), (start, steps) => {
        const sent: Uint8Array[] = [syntheticFrame(start)];
        const history = [start];
        let sequence = start;
        let losses = 0;
        let lostFrames = 0;
        let repeats = 0;
        let restarts = 0;
        for (const { kind, n } of steps) {
          if (kind === 'repeat') {
            if (history.length < n) continue;
            sent.push(syntheticFrame(history[history.length - n]!));
            repeats++;
            continue;
          }
          if (kind === 'loss') {
            sequence = (sequence + n) % 65536;
            losses++;
            lostFrames += n;
          }
          if (kind === 'restart') {
            // A restart well behind the current count (the history holds no frame with that number).
            sequence = (sequence + 40000) % 65536;
            restarts++;
          }
          sequence = (sequence + 1) % 65536;
          sent.push(syntheticFrame(sequence));
          history.push(sequence);
        }
        const { decoder, frames, gaps } = collectingDecoder();
        decoder.push(concat(sent));
        expect(frames.map((f) => f.sequence)).toEqual(history);
        expect(decoder.counters.duplicates).toBe(repeats);
        expect(gaps.filter((g) => g.kind === 'loss')).toHaveLength(losses);
        expect(gaps.filter((g) => g.kind === 'resync')).toHaveLength(restarts);
        expect(decoder.counters.lostSamples).toBe(lostFrames * 4);
      }),
      { numRuns: 200 },
    );
  });
});

describe('version 2 sample counter', () => {
  const frame = (sequence: number, sampleCounter: number, samplesPerFrame: number) =>
    frameBytes({ sequence, channelCount: 2, samplesPerFrame, sampleCounter }, new Array<number>(2 * samplesPerFrame).fill(sequence));

  it('counts the samples lost exactly when a dropped frame is followed by a shorter one', () => {
    // Frames of 64, 64 (lost), 16 samples: the sequence alone would count 16 lost samples, the counter 64.
    const { decoder, gaps } = collectingDecoder();
    decoder.push(concat([frame(0, 1000, 64), frame(2, 1128, 16)]));
    // The index after the gap counts the lost samples: 64 + 64 = 128, what the device's counter says (1128 − 1000).
    expect(gaps).toEqual([{ sampleIndex: 128, kind: 'loss', lostFrames: 1, lostSamples: 64, expectedSequence: 1, receivedSequence: 2 }]);
  });

  it('follows the counter across its wrap at 2^32 and reads a backward counter as a resync', () => {
    const { decoder, gaps } = collectingDecoder();
    decoder.push(concat([frame(0, 2 ** 32 - 8, 8), frame(1, 0, 8), frame(2, 8, 8), frame(3, 4, 8)]));
    expect(gaps.map((g) => g.kind)).toEqual(['resync']);
    expect(decoder.counters.framesGood).toBe(4);
  });

  // A run of minutes at MHz rates: indices and counters beyond 2^31 (doubles, no longer small integers in the engine).
  it('counts exactly past 2^31 samples and with counters beyond 2^31, repeats and the 2^32 wrap included', () => {
    const { decoder, frames, gaps } = collectingDecoder();
    decoder.push(
      concat([frame(0, 0, 8), frame(1, 1.5e9, 8), frame(2, 3e9, 8), frame(3, 3e9 + 8, 8), frame(3, 3e9 + 8, 8), frame(5, 3e9 + 24, 8), frame(6, 2 ** 32 - 8, 8), frame(7, 0, 8)]),
    );
    expect(gaps.map((gap) => [gap.sampleIndex, gap.lostSamples])).toEqual([
      [1.5e9, 1.5e9 - 8],
      [3e9, 1.5e9 - 8],
      [3e9 + 24, 8],
      [2 ** 32 - 8, 2 ** 32 - 8 - (3e9 + 32)],
    ]);
    // The index of each frame's first sample is the device's count of it, as nothing but counted losses happened.
    expect(frames.map((f) => [f.sampleIndex, f.sampleCounter])).toEqual([
      [0, 0],
      [1.5e9, 1.5e9],
      [3e9, 3e9],
      [3e9 + 8, 3e9 + 8],
      [3e9 + 24, 3e9 + 24],
      [2 ** 32 - 8, 2 ** 32 - 8],
      [2 ** 32, 0],
    ]);
    // The four gaps: 2 · (1.5e9 − 8) + 8 + (2^32 − 8 − (3e9 + 32)).
    expect(decoder.counters).toMatchObject({ duplicates: 1, gaps: 4, lostSamples: 2 ** 32 - 48 });
  });

  it('drops a repeated frame whose counter repeats too', () => {
    const { decoder, frames } = collectingDecoder();
    decoder.push(concat([frame(0, 0, 8), frame(1, 8, 8), frame(1, 8, 8), frame(2, 16, 8)]));
    expect(frames.map((f) => f.sampleCounter)).toEqual([0, 8, 16]);
    expect(decoder.counters).toMatchObject({ duplicates: 1, gaps: 0 });
  });
});
