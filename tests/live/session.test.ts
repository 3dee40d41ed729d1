// listen's live loop in process, over the manual byte source: the live fit held back inside the chain, the duration
// cut, the bounded input buffer when an output stalls, and the signal's grace time. Frames come from the emulator
// (invented motion).
import { describe, expect, it } from 'vitest';
import { createManualByteSource } from '../../src/io/serial/index.js';
import { createFrameEmulator, type FrameEmulatorOptions } from '../../tools/live/frame-emulator.js';
import { createLiveSession, type LiveSink, type LiveSessionOptions } from '../../tools/live/live-session.js';

const ellipse = { offsetX: 800, offsetY: -500, amplitudeX: 12000, amplitudeY: 10800, phaseErrorRad: 0.06 };
const RATE = 100_000;
const SPF = 50;
const OPTICS = { wavelengthM: 632.9908e-9, fold: 2 };

function emulator(overrides: Partial<FrameEmulatorOptions> = {}) {
  return createFrameEmulator({
    rateHz: RATE, samplesPerFrame: SPF, axes: 1, motion: { kind: 'constant', velocityMS: 0.001 }, ...OPTICS, refractiveIndex: 1, ellipse,
    noiseRms: 0, seed: 3, includeRate: true, startSequence: 0, text: false, faults: { garbageEvery: 0, garbageBytes: 1, dropEvery: 0, corruptEvery: 0 },
    ...overrides,
  });
}

/** A session over a manual source whose rows sink keeps copies of every position block's indices. */
function session(track: Partial<LiveSessionOptions['track']> = {}, extraSinks: LiveSink[] = [], maxBufferedBytes = 1 << 20) {
  const source = createManualByteSource();
  const rows: number[] = [];
  const sink: LiveSink = {
    name: 'rows',
    positions(positions) {
      const summary = positions.summaries[0]!;
      for (let i = 0; i < summary.length; i++) rows.push(summary.firstSampleIndex + i);
    },
  };
  const chain = createLiveSession({ source, track: { axes: [{ ...OPTICS, calibration: ellipse }], ...track }, sinks: [sink, ...extraSinks], maxBufferedBytes });
  return { source, rows, chain };
}

const tick = () => new Promise((resolve) => setTimeout(resolve, 0));

describe('live session', () => {
  it('holds the first samples back until the live fit, then processes all of them from sample 0', async () => {
    const { source, rows, chain } = session({ axes: [{ ...OPTICS, calibration: 'fit' }], fitSamples: 1000 });
    const live = chain.start();
    const frames = emulator({ noiseRms: 20 });
    source.linkUp();
    for (let k = 0; k < 10; k++) {
      source.write(frames.next(3).bytes);
      await tick();
      if (live.link!.samplesDelivered < 1000) expect(rows).toHaveLength(0);
    }
    source.end();
    const summary = await live.done;
    expect(summary.progress.calibration).toBe('fitted');
    expect(rows).toEqual(Array.from({ length: 30 * SPF }, (_, i) => i));
    const fit = summary.fits.find((attempt) => attempt.result.ok)!.result;
    // Fitted ellipse close to the emulated one (noise 20 counts on 12000: offsets within a few counts).
    expect(fit.ok && fit.calibration.offsetX).toBeCloseTo(800, -1);
    expect(fit.ok && fit.calibration.phaseErrorRad).toBeCloseTo(0.06, 2);
  });

  it('takes byte chunks waiting in its input together (16 KiB at most): fewer, longer blocks, the same positions', async () => {
    const run = async (paced: boolean, framesPerChunk: (k: number) => number = () => 3) => {
      const source = createManualByteSource();
      const blocks: number[] = [];
      const positions: number[] = [];
      const sink: LiveSink = {
        name: 'rows',
        positions({ summaries }) {
          blocks.push(summaries[0]!.length);
          positions.push(...summaries[0]!.output.positionM);
        },
      };
      const live = createLiveSession({ source, track: { axes: [{ ...OPTICS, calibration: ellipse }] }, sinks: [sink], maxBufferedBytes: 1 << 20 }).start();
      const frames = emulator({ motion: { kind: 'constant', velocityMS: 0.05 } });
      source.linkUp();
      // 400 chunks of 3 frames (150 samples, 650 bytes each): 260 kB in all.
      for (let k = 0; k < 400; k++) {
        source.write(frames.next(framesPerChunk(k)).bytes.slice());
        if (paced) await tick();
      }
      source.end();
      await live.done;
      return { blocks, positions };
    };
    const paced = await run(true);
    const queued = await run(false);
    expect(paced.blocks.every((length) => length === 150)).toBe(true);
    // Whole chunks up to 16 384 bytes: 25 chunks (16 250 bytes) a block.
    expect(queued.blocks).toEqual(Array.from({ length: 16 }, () => 3750));
    expect(queued.positions).toEqual(paced.positions);
    // Chunks of 1 to 7 frames in turn: blocks of many lengths, the same positions as chunk by chunk.
    const mixed = await run(false, (k) => 1 + (k % 7));
    const mixedPaced = await run(true, (k) => 1 + (k % 7));
    expect(new Set(mixed.blocks).size).toBeGreaterThan(3);
    expect(mixed.positions).toEqual(mixedPaced.positions);
  });

  it('ends with an error naming the fix when the live fit fails for good', async () => {
    const { source, chain } = session({ axes: [{ ...OPTICS, calibration: 'fit' }], fitSamples: 64, fitAttempts: 2 });
    const live = chain.start();
    // No motion: every sample on one point of the ellipse, nothing to fit. Attempts at 100 and 150 samples held.
    const still = emulator({ motion: { kind: 'constant', velocityMS: 0 } });
    const failed = expect(live.done).rejects.toThrow(/cannot fit the correction of axis axis0 to the first 150 samples .*move the stage over at least one fringe/);
    // A copy: the emulator reuses its buffer and the session queues chunks. One at a time, so that each is a block of
    // its own (chunks waiting together are taken as one block, and attempts are made at the end of a block).
    for (let k = 0; k < 4; k++) {
      source.write(still.next(1).bytes.slice());
      await tick();
    }
    await failed;
  });

  it('stops exactly after the duration, even inside a chunk', async () => {
    const { source, rows, chain } = session({ durationS: 0.00123 }); // 123 samples: inside the third frame
    const live = chain.start();
    source.linkUp();
    source.write(emulator().next(5).bytes);
    const summary = await live.done;
    expect(summary.stopReason).toBe('duration');
    expect(summary.progress.samplesProcessed).toBe(123);
    expect(rows).toHaveLength(123);
  });

  it('stops when an output stalls while more than the input buffer waits, naming that output', async () => {
    const stalled: LiveSink = { name: 'the result output (standard output)', positions: () => () => new Promise<void>(() => undefined) };
    const frames = emulator();
    const frameBytes = frames.next(1).bytes.length;
    const { source, chain } = session({}, [stalled], 10 * frameBytes);
    const live = chain.start();
    source.linkUp();
    // The first chunk's write never finishes; 10 more frames fit in the buffer, the 11th does not.
    for (let k = 0; k < 12; k++) source.write(frames.next(1).bytes);
    const summary = await live.done;
    expect(summary).toMatchObject({ stopReason: 'stalled', stalledSink: 'the result output (standard output)' });
    expect(source.openCount).toBe(0);
  });

  it('ends after the grace time when a signal comes while an output is stalled', async () => {
    const stalled: LiveSink = { name: 'the record', samples: () => () => new Promise<void>(() => undefined) };
    const { source, chain } = session({}, [stalled]);
    const controller = new AbortController();
    const live = chain.start(controller.signal);
    source.write(emulator().next(1).bytes);
    await tick();
    controller.abort();
    const summary = await live.done;
    expect(summary).toMatchObject({ stopReason: 'signal', stalledSink: 'the record' });
  });
});
