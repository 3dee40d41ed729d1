// listen over a real pseudo-terminal (socat) fed by this test with frames of an invented constant motion, with
// the sequence anomalies a device or link can produce: a repeated frame, a dropped frame and a counter that
// restarts. --duration counts samples received, and the summary (file and stderr) records every gap that shaped
// the run. Also: frames larger than --max-samples-per-frame are named with the value that admits them.
import { closeSync, openSync, writeSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { createFrameEmulator } from '../../tools/live/frame-emulator.js';
import { finished, readJson, readRows, startCli, usePtyPairs } from './processes.js';

const RATE = 100_000;
const SPF = 64;
const OPTICS = ['--wavelength-nm', '632.9908', '--fold', '2'];
const ptys = usePtyPairs('fringetally-gaps-');

/** Frames of an invented constant motion, numbered from `startSequence`; each returned frame is a copy. */
function frames(startSequence: number, count: number): Uint8Array[] {
  const emulator = createFrameEmulator({
    rateHz: RATE, samplesPerFrame: SPF, axes: 1, motion: { kind: 'constant', velocityMS: 0.001 }, wavelengthM: 632.9908e-9, fold: 2,
    refractiveIndex: 1, ellipse: { offsetX: 800, offsetY: -500, amplitudeX: 12000, amplitudeY: 10800, phaseErrorRad: 0.06 },
    noiseRms: 0, seed: 5, includeRate: true, startSequence, text: false, faults: { garbageEvery: 0, garbageBytes: 1, dropEvery: 0, corruptEvery: 0 },
  });
  return Array.from({ length: count }, () => emulator.next(1).bytes.slice());
}

/** Writes the bytes into the firmware end of the pair (blocking writes: listen reads them in its own process). */
function send(firmware: string, chunks: readonly Uint8Array[]): void {
  const fd = openSync(firmware, 'w');
  try {
    for (const chunk of chunks) writeSync(fd, chunk);
  } finally {
    closeSync(fd);
  }
}

interface Summary {
  stopReason: string;
  durationSamples: number | null;
  samplesDelivered: number;
  samplesProcessed: number;
  rowsWritten: number;
  gaps: { sampleIndex: number; lostSamples: number; cause: string }[];
  gapCount: number;
  gapsByCause: Record<string, { count: number; lostSamples: number }>;
  duplicates: { count: number; frames: { sampleIndex: number; sequence: number }[] };
  wire: { duplicates: number; oversizeHeaders: number; oversizeSamplesPerFrame: number };
}

describe('listen: gaps that shape a run', () => {
  it('a repeated frame, a dropped frame and a restarting counter: --duration ends after the samples received, and the summary lists each', async () => {
    const { device, firmware } = await ptys.pair();
    const dir = ptys.dir();
    // --duration 0.16 s at 100 kHz: 16 000 samples received. Counting lost samples (64 for the dropped frame and
    // 1 marked for the restart) would have ended 65 samples earlier.
    const listen = startCli(['listen', '--port', device, ...OPTICS, '--out', 'gaps.csv', '--summary', 'gaps.json', '--duration', '0.16', '--fit-samples', '2048'], dir);
    await listen.stderrHas('link up');
    const before = frames(0, 200);
    const restarted = frames(0, 100);
    // Frames 0..99, 99 again (a retransmission), 100..149, 151..199 (150 lost), then the device restarts at 0.
    send(firmware, [...before.slice(0, 100), before[99]!, ...before.slice(100, 150), ...before.slice(151), ...restarted]);
    expect(await finished(listen), listen.output.stderr).toBe(0);

    const summary = readJson<Summary>(join(dir, 'gaps.json'));
    expect(summary).toMatchObject({ stopReason: 'duration', durationSamples: 16_000, samplesProcessed: 16_000, rowsWritten: 16_000, gapCount: 2 });
    expect(summary.gaps).toEqual([
      { sampleIndex: 151 * SPF, lostSamples: SPF, cause: 'sequence' },
      { sampleIndex: 200 * SPF + 1, lostSamples: 1, cause: 'resync' },
    ]);
    expect(summary.gapsByCause).toEqual({ sequence: { count: 1, lostSamples: SPF }, link: { count: 0, lostSamples: 0 }, resync: { count: 1, lostSamples: 1 } });
    // The repeat arrived after frame 99, when sample 100 × 64 was next.
    expect(summary.duplicates).toEqual({ count: 1, frames: [{ sampleIndex: 100 * SPF, sequence: 99 }] });
    expect(summary.wire.duplicates).toBe(1);
    // The last row is the 16 000th sample received: index 16 000 + 64 lost + 1 marked − 1.
    const t = readRows(join(dir, 'gaps.csv')).columns.t!;
    expect(t).toHaveLength(16_000);
    expect(Math.round(t.at(-1)! * RATE)).toBe(16_000 + SPF + 1 - 1);
    const stderr = listen.output.stderr;
    expect(stderr).toContain('repeated frame 99 at t = 0.064000 s (sample 6400) dropped');
    expect(stderr).toContain('frame counter restarted or went backwards at t = 0.128010 s (sample 12801)');
    expect(stderr).toContain('stopped after 0.16 s of samples received');
    expect(stderr).toContain('gaps 2 (1 sequence jump(s), 64 lost; 1 counter restart(s), length unknown); repeated frames dropped 1');
  });

  it('frames larger than --max-samples-per-frame: named while listening and in the summary with the value that admits them', async () => {
    const { device, firmware } = await ptys.pair();
    const dir = ptys.dir();
    const listen = startCli(['listen', '--port', device, ...OPTICS, '--out', 'big.csv', '--summary', 'big.json', '--max-samples-per-frame', '32'], dir);
    await listen.stderrHas('link up');
    send(firmware, frames(0, 20));
    await listen.stderrHas('--max-samples-per-frame 64 admits them');
    listen.child.kill('SIGINT');
    expect(await finished(listen), listen.output.stderr).toBe(0);
    const summary = readJson<Summary>(join(dir, 'big.json'));
    expect(summary.samplesDelivered).toBe(0);
    expect(summary.wire.oversizeHeaders).toBeGreaterThan(0);
    expect(summary.wire.oversizeSamplesPerFrame).toBe(SPF);
    expect(listen.output.stderr).toMatch(/no samples received\n.*\n\d+ frame\(s\) of up to 64 samples refused: more than --max-samples-per-frame 32; --max-samples-per-frame 64 admits them/);
  });
});
