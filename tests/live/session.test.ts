// The live loop in process, over the manual byte source: gaps at link outages, the held-back live fit, the
// duration cut, the rate rules and the text-line outage rule. Frames come from the emulator (invented motion).
import { describe, expect, it } from 'vitest';
import { createManualByteSource } from '../../src/io/serial/index.js';
import { createFrameEmulator, type FrameEmulatorOptions } from '../../tools/live/frame-emulator.js';
import { startLiveSession, type LiveBlock, type LiveSessionOptions } from '../../tools/live/live-session.js';

const ellipse = { offsetX: 800, offsetY: -500, amplitudeX: 12000, amplitudeY: 10800, phaseErrorRad: 0.06 };
const RATE = 100_000;
const SPF = 50;

function emulator(overrides: Partial<FrameEmulatorOptions> = {}) {
  return createFrameEmulator({
    rateHz: RATE,
    samplesPerFrame: SPF,
    axes: 1,
    motion: { kind: 'constant', velocityMS: 0.001 },
    wavelengthM: 632.9908e-9,
    fold: 2,
    refractiveIndex: 1,
    ellipse,
    noiseRms: 0,
    seed: 3,
    includeRate: true,
    startSequence: 0,
    text: false,
    faults: { garbageEvery: 0, garbageBytes: 1, dropEvery: 0, corruptEvery: 0 },
    ...overrides,
  });
}

/** A session over a manual source collecting copies of every block's positions and flags. */
function session(overrides: Partial<LiveSessionOptions> = {}) {
  const source = createManualByteSource();
  const blocks: { firstIndex: number; positionM: number[]; flags: number[] }[] = [];
  const sink = {
    block(block: LiveBlock) {
      blocks.push({ firstIndex: block.firstIndex, positionM: Array.from(block.positionM.subarray(0, block.length)), flags: Array.from(block.flags.subarray(0, block.length)) });
    },
  };
  const live = startLiveSession({
    source,
    mode: 'binary',
    settings: { wavelengthM: 632.9908e-9, fold: 2, refractiveIndex: 1 },
    calibration: ellipse,
    sinks: [sink],
    ...overrides,
  });
  return { source, blocks, live };
}

const tick = () => new Promise((resolve) => setTimeout(resolve, 0));

describe('live session', () => {
  it('marks a gap of at least one sample after a link outage when the frame counter shows no jump', async () => {
    const { source, live, blocks } = session();
    const frames = emulator();
    source.linkUp();
    source.write(frames.next(4).bytes);
    await tick();
    source.linkDown();
    source.linkUp();
    source.write(frames.next(4).bytes);
    await tick();
    source.end();
    const summary = await live.done;
    expect(summary.gaps).toEqual([{ sampleIndex: 4 * SPF + 1, lostSamples: 1, cause: 'link' }]);
    expect(summary.status).toMatchObject({ linkDowns: 1, linkReturns: 1, samplesDelivered: 8 * SPF, nextSampleIndex: 8 * SPF + 1, countLost: true });
    const after = blocks.find((block) => block.firstIndex === 4 * SPF + 1)!;
    expect(after.flags[0]! & 16).toBe(16); // AlarmBit.inputGap on the first sample after the gap
  });

  it('takes the lost count from the frame counter after an outage when it jumped', async () => {
    const { source, live } = session();
    const frames = emulator();
    source.linkUp();
    source.write(frames.next(4).bytes);
    await tick();
    source.linkDown();
    frames.next(3); // made while the link was down: never received
    source.linkUp();
    source.write(frames.next(2).bytes);
    await tick();
    source.end();
    const summary = await live.done;
    expect(summary.gaps).toEqual([{ sampleIndex: 7 * SPF, lostSamples: 3 * SPF, cause: 'link' }]);
  });

  it('holds the first samples back until the live fit, then processes all of them from sample 0', async () => {
    const { source, live, blocks } = session({ calibration: null, fitSamples: 1000 });
    const frames = emulator({ noiseRms: 20 });
    source.linkUp();
    for (let k = 0; k < 10; k++) {
      source.write(frames.next(3).bytes);
      await tick();
      if (live.status.samplesDelivered < 1000) expect(blocks).toHaveLength(0);
    }
    source.end();
    const summary = await live.done;
    expect(summary.fit).not.toBeNull();
    expect(summary.status.calibration).toBe('fitted');
    expect(blocks[0]!.firstIndex).toBe(0);
    expect(blocks.reduce((sum, block) => sum + block.positionM.length, 0)).toBe(30 * SPF);
    // Fitted ellipse close to the emulated one (noise 20 counts on 12000: offsets within a few counts).
    expect(summary.calibration!.offsetX).toBeCloseTo(800, -1);
    expect(summary.calibration!.phaseErrorRad).toBeCloseTo(0.06, 2);
  });

  it('stops exactly after the duration, even inside a chunk', async () => {
    const { source, live, blocks } = session({ durationS: 0.00123 }); // 123 samples: inside the third frame
    source.linkUp();
    source.write(emulator().next(5).bytes);
    const summary = await live.done;
    expect(summary.stopReason).toBe('duration');
    expect(summary.status.samplesProcessed).toBe(123);
    expect(blocks.reduce((sum, block) => sum + block.positionM.length, 0)).toBe(123);
  });

  it('refuses a --rate-hz that contradicts the frames, and frames without a rate when none is given', async () => {
    const conflicting = session({ rateHz: 50_000 });
    conflicting.source.write(emulator().next(1).bytes);
    await expect(conflicting.live.done).rejects.toThrow(/frames say 100000 Hz but --rate-hz says 50000 Hz/);
    const rateless = session();
    rateless.source.write(emulator({ includeRate: false }).next(1).bytes);
    await expect(rateless.live.done).rejects.toThrow(/no sample rate field: give --rate-hz/);
  });

  it('rejects the text line cut by an outage instead of joining its halves into a wrong sample', async () => {
    const { source, live } = session({ mode: 'text', rateHz: 1000 });
    source.linkUp();
    source.write(Buffer.from('100,200\n300,4', 'latin1'));
    await tick();
    source.linkDown();
    source.linkUp();
    source.write(Buffer.from('00\n500,600\n', 'latin1'));
    await tick();
    source.end();
    const summary = await live.done;
    expect(summary.status.text).toMatchObject({ linesGood: 2, linesMalformed: 1 });
    expect(summary.gaps).toEqual([{ sampleIndex: 2, lostSamples: 1, cause: 'link' }]);
  });

  it('rejects invalid options naming the option', () => {
    expect(() => session({ axis: 9 })).toThrow(/axis must be an integer in 0\.\.7 \(got 9\)/);
    expect(() => session({ fitSamples: 10 })).toThrow(/fitSamples must be an integer in 64\.\./);
    expect(() => session({ mode: 'text' })).toThrow(/text lines carry no sample rate/);
  });
});
