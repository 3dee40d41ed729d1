// `--tools` also measures listen's chain without a serial port: wire frames (2 channels, 256 samples a frame,
// the core cases' int16 signal) pushed in 4096-byte chunks from an in-memory byte source through the live session
// (decoder, pipeline) into the result writer (CSV, every row; --every 10000 beside it), as `listen` runs them.
// Wall clock and process CPU time from the first chunk to the session's end.
import { mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { EllipseCalibration } from '../../src/core/index.js';
import { createResultWriter } from '../../src/io/results/index.js';
import { createManualByteSource } from '../../src/io/serial/index.js';
import { encodeWireFrame, wireFrameLength } from '../../src/io/wire/index.js';
import { createLiveSession } from '../../tools/live/live-session.js';
import type { BenchResult } from '../harness.js';
import { benchSignal, TOTAL_SAMPLES } from './core.js';

// The calibration benchSignal draws its ellipse from (bench/cases/core.ts).
const ellipse: EllipseCalibration = { offsetX: 700, offsetY: -450, amplitudeX: 12000, amplitudeY: 10800, phaseErrorRad: 0.06 };
const SAMPLES_PER_FRAME = 256;
const CHUNK_BYTES = 4096;

function wireChunks(): Uint8Array[] {
  const { x, y } = benchSignal(TOTAL_SAMPLES);
  const frameBytes = wireFrameLength(2, SAMPLES_PER_FRAME, 1);
  const frames = TOTAL_SAMPLES / SAMPLES_PER_FRAME;
  const bytes = new Uint8Array(frames * frameBytes);
  const interleaved = new Int16Array(2 * SAMPLES_PER_FRAME);
  for (let f = 0; f < frames; f++) {
    for (let i = 0; i < SAMPLES_PER_FRAME; i++) {
      interleaved[2 * i] = x[f * SAMPLES_PER_FRAME + i]!;
      interleaved[2 * i + 1] = y[f * SAMPLES_PER_FRAME + i]!;
    }
    encodeWireFrame({ sequence: f % 65536, channelCount: 2, samplesPerFrame: SAMPLES_PER_FRAME, sampleRateHz: 10_000_000 }, interleaved, bytes, f * frameBytes);
  }
  const chunks: Uint8Array[] = [];
  for (let at = 0; at < bytes.length; at += CHUNK_BYTES) chunks.push(bytes.subarray(at, Math.min(at + CHUNK_BYTES, bytes.length)));
  return chunks;
}

async function listenOnce(chunks: readonly Uint8Array[], out: string, every: number): Promise<{ wall: number; cpu: number }> {
  const writer = await createResultWriter(out, { format: 'csv', every });
  const source = createManualByteSource();
  const wallStart = process.hrtime.bigint();
  const cpuStart = process.cpuUsage();
  const session = createLiveSession({
    source,
    track: { axes: [{ wavelengthM: 632.9908e-9, fold: 2, refractiveIndex: 1, calibration: ellipse }] },
    maxBufferedBytes: 2 ** 30,
    sinks: [
      {
        name: 'rows',
        // The writer's job runs after the chunk: it gets a copy, as listen's does.
        positions({ summaries, rateHz }) {
          const { firstSampleIndex, length, output } = summaries[0]!;
          const block = { firstIndex: firstSampleIndex, length, rateHz, positionM: output.positionM.slice(0, length), velocityMS: output.velocityMS.slice(0, length), level: output.level.slice(0, length), flags: output.flags.slice(0, length) };
          return () => writer.write(block);
        },
      },
    ],
  }).start();
  source.linkUp();
  for (const chunk of chunks) source.write(chunk);
  source.end();
  await session.done;
  await writer.close();
  const cpu = process.cpuUsage(cpuStart);
  return { wall: Number(process.hrtime.bigint() - wallStart) / 1e9, cpu: (cpu.user + cpu.system) / 1e6 };
}

export async function listenCases(passes = 5): Promise<BenchResult[]> {
  const chunks = wireChunks();
  const directory = await mkdtemp(join(tmpdir(), 'fringetally-bench-listen-'));
  const results: BenchResult[] = [];
  try {
    for (const every of [1, 10_000]) {
      await listenOnce(chunks, join(directory, 'rows.csv'), every); // warm-up
      const runs: { wall: number; cpu: number }[] = [];
      for (let pass = 0; pass < passes; pass++) runs.push(await listenOnce(chunks, join(directory, 'rows.csv'), every));
      runs.sort((a, b) => a.cpu - b.cpu);
      const run = runs[runs.length >> 1]!;
      results.push({
        name: `listen/in-memory/2ch/${SAMPLES_PER_FRAME}spf/every${every}`,
        samplesPerSecond: TOTAL_SAMPLES / run.cpu,
        nsPerSample: (run.cpu * 1e9) / TOTAL_SAMPLES,
        passes,
        extra: { wallSamplesPerSecond: TOTAL_SAMPLES / run.wall },
      });
    }
  } finally {
    await rm(directory, { recursive: true, force: true });
  }
  return results;
}
