// `--tools` also measures listen's chain without a serial port: wire frames (2 channels, 256 samples a frame,
// the core cases' int16 signal) pushed in 4096-byte chunks from an in-memory byte source through the live session
// (decoder, pipeline) into the result writer through listen's rows sink (CSV, every row; --every 10000 beside it),
// as `listen` runs them.
// Wall clock and process CPU time from the first chunk to the session's end; passes of the bare default pipeline
// alternate with the chain's in the same process, and `overBarePipeline` is the median ratio of their speeds. Memory: the same chain over 10^7 and
// 10^8 samples (frames encoded as they are fed, --every 10000), each in a process of its own, and the growth of its
// peak resident memory between them: it must not grow with the run.
import { spawnSync } from 'node:child_process';
import { mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';
import { createPipeline } from '../../src/accel/index.js';
import type { AlarmEvent, EllipseCalibration } from '../../src/core/index.js';
import { createResultWriter } from '../../src/io/results/index.js';
import { createManualByteSource } from '../../src/io/serial/index.js';
import { encodeWireFrame, wireFrameLength } from '../../src/io/wire/index.js';
import { createLiveSession } from '../../tools/live/live-session.js';
import { resultRows } from '../../tools/live/result-rows.js';
import { median, type BenchResult } from '../harness.js';
import { benchSignal, BLOCK, TOTAL_SAMPLES } from './core.js';

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

/**
 * One run of the chain. Queued: every chunk written at once, so chunks wait in the session's input and are taken
 * together (up to 16 KiB); paced: one chunk per turn of the event loop, each a block of its own, as from a port
 * that the chain keeps up with.
 */
async function listenOnce(chunks: readonly Uint8Array[], out: string, every: number, paced = false): Promise<{ wall: number; cpu: number }> {
  const writer = await createResultWriter(out, { format: 'csv', every });
  const source = createManualByteSource();
  const wallStart = process.hrtime.bigint();
  const cpuStart = process.cpuUsage();
  const session = createLiveSession({
    source,
    track: { axes: [{ wavelengthM: 632.9908e-9, fold: 2, refractiveIndex: 1, calibration: ellipse }] },
    maxBufferedBytes: 2 ** 30,
    sinks: [
      // Listen's own rows sink.
      { name: 'rows', positions: resultRows(writer) },
    ],
  }).start();
  source.linkUp();
  // Indexed: the loop is inside the timed span, and for-of's iterator results would be the bench's garbage, not the chain's.
  for (let k = 0; k < chunks.length; k++) {
    source.write(chunks[k]!);
    if (paced) await new Promise((resolve) => setImmediate(resolve));
  }
  source.end();
  await session.done;
  const cpu = process.cpuUsage(cpuStart);
  const wall = Number(process.hrtime.bigint() - wallStart) / 1e9;
  // Closed after the span, as the header says: the close (the last bytes, the file's sync to disk and rename, on
  // libuv's threads) comes once a run, and was 10-20 ms of CPU time on a pass of 4.2 M samples, ~8 % of it.
  await writer.close();
  return { wall, cpu: (cpu.user + cpu.system) / 1e6 };
}

/**
 * Listen's chain over `samples` samples, --every 10000, with the frames encoded as they are fed (the bench signal
 * repeated), yielding to the event loop after every chunk so the session keeps up as it would with a port.
 */
async function listenStream(samples: number, out: string): Promise<void> {
  const cycle = 1 << 20; // the signal repeated: 2^20 samples, so the process holds little beside the chain
  const { x, y } = benchSignal(cycle);
  const frameBytes = wireFrameLength(2, SAMPLES_PER_FRAME, 1);
  const framesPerChunk = 16;
  const chunk = new Uint8Array(framesPerChunk * frameBytes);
  const interleaved = new Int16Array(2 * SAMPLES_PER_FRAME);
  const writer = await createResultWriter(out, { format: 'csv', every: 10_000 });
  const source = createManualByteSource();
  let stopped = '';
  const session = createLiveSession({
    source,
    track: { axes: [{ wavelengthM: 632.9908e-9, fold: 2, refractiveIndex: 1, calibration: ellipse }] },
    maxBufferedBytes: 1 << 20,
    sinks: [
      { name: 'rows', positions: resultRows(writer) },
    ],
  }).start();
  void session.done.then((summary) => {
    stopped = summary.stopReason;
  });
  source.linkUp();
  const frames = Math.ceil(samples / SAMPLES_PER_FRAME);
  for (let f = 0; f < frames && stopped === ''; f += framesPerChunk) {
    const count = Math.min(framesPerChunk, frames - f);
    for (let k = 0; k < count; k++) {
      const at = ((f + k) * SAMPLES_PER_FRAME) % cycle;
      for (let i = 0; i < SAMPLES_PER_FRAME; i++) {
        interleaved[2 * i] = x[at + i]!;
        interleaved[2 * i + 1] = y[at + i]!;
      }
      encodeWireFrame({ sequence: (f + k) % 65536, channelCount: 2, samplesPerFrame: SAMPLES_PER_FRAME, sampleRateHz: 10_000_000 }, interleaved, chunk, k * frameBytes);
    }
    // A copy per chunk, as a port hands out a new buffer each time.
    source.write(chunk.slice(0, count * frameBytes));
    await new Promise((resolve) => setImmediate(resolve));
  }
  source.end();
  const summary = await session.done;
  await writer.close();
  if (summary.stopReason !== 'source ended') throw new Error(`listen chain stopped: ${summary.stopReason}`);
}

const USAGE = fileURLToPath(new URL('../report-usage.js', import.meta.url));

/** Peak resident memory of listen's chain over 10^7 and 10^8 samples, each in a process of its own. */
export async function listenMemoryCases(lengths: readonly [number, number] = [1e7, 1e8]): Promise<BenchResult[]> {
  const directory = await mkdtemp(join(tmpdir(), 'fringetally-bench-listen-memory-'));
  const results: BenchResult[] = [];
  const peaks: number[] = [];
  try {
    for (const samples of lengths) {
      const start = process.hrtime.bigint();
      const child = spawnSync(process.execPath, ['--import', USAGE, fileURLToPath(import.meta.url), '--stream', String(samples), join(directory, 'rows.csv')], {
        stdio: ['ignore', 'ignore', 'pipe', 'pipe'],
        encoding: 'utf8',
      });
      const wall = Number(process.hrtime.bigint() - start) / 1e9;
      if (child.status !== 0) throw new Error(`listen memory case exited with ${child.status}: ${child.stderr}`);
      const usage = JSON.parse(String(child.output[3])) as { cpuSeconds: number; maxRssKiB: number };
      peaks.push(usage.maxRssKiB);
      results.push({
        name: `listen/in-memory/2ch/${SAMPLES_PER_FRAME}spf/every10000/${samples}/memory`,
        samplesPerSecond: samples / usage.cpuSeconds,
        nsPerSample: (usage.cpuSeconds * 1e9) / samples,
        passes: 1,
        extra: { samples, wallSamplesPerSecond: samples / wall, peakRssMiB: usage.maxRssKiB / 1024 },
      });
    }
    results.push({
      name: `listen/in-memory/${lengths[0]}-to-${lengths[1]}/peak-rss-growth`,
      samplesPerSecond: Number.NaN,
      nsPerSample: Number.NaN,
      passes: 1,
      extra: { peakRssGrowthMiB: (peaks[1]! - peaks[0]!) / 1024 },
    });
  } finally {
    await rm(directory, { recursive: true, force: true });
  }
  return results;
}

/**
 * Passes of the bare default pipeline over the same signal in 4096-sample blocks (the core case
 * `pipeline/int16/block4096`), to alternate with the chain's: on a shared machine the speed of both moves between
 * runs, their ratio within one process much less. Returns one pass's process CPU time, s.
 */
export function barePipeline(): () => number {
  const { x, y } = benchSignal(TOTAL_SAMPLES);
  const pipeline = createPipeline({ rateHz: 10_000_000, wavelengthM: 632.9908e-9, fold: 2, calibration: ellipse, adc: { kind: 'int16' } });
  const output = { positionM: new Float64Array(BLOCK), velocityMS: new Float64Array(BLOCK), level: new Float32Array(BLOCK), flags: new Uint8Array(BLOCK) };
  const events: AlarmEvent[] = [];
  return () => {
    pipeline.reset();
    const start = process.cpuUsage();
    for (let at = 0; at < TOTAL_SAMPLES; at += BLOCK) {
      pipeline.process(x.subarray(at, at + BLOCK), y.subarray(at, at + BLOCK), BLOCK, output, events);
      events.length = 0;
    }
    const used = process.cpuUsage(start);
    return (used.user + used.system) / 1e6;
  };
}

export async function listenCases(passes = 5): Promise<BenchResult[]> {
  const chunks = wireChunks();
  const bare = barePipeline();
  const directory = await mkdtemp(join(tmpdir(), 'fringetally-bench-listen-'));
  const results: BenchResult[] = [];
  try {
    for (const [every, paced] of [[1, false], [10_000, false], [10_000, true]] as const) {
      // Warm-up, then passes of the chain and of the bare pipeline alternating; medians, and the median of the
      // pairs' ratios (the chain's samples per second over the bare pipeline's, both in process CPU time).
      bare();
      await listenOnce(chunks, join(directory, 'rows.csv'), every, paced);
      const runs: { wall: number; cpu: number }[] = [];
      const bareSeconds: number[] = [];
      const ratios: number[] = [];
      for (let pass = 0; pass < passes; pass++) {
        bareSeconds.push(bare());
        runs.push(await listenOnce(chunks, join(directory, 'rows.csv'), every, paced));
        ratios.push(bareSeconds[pass]! / runs[pass]!.cpu);
      }
      runs.sort((a, b) => a.cpu - b.cpu);
      const run = runs[runs.length >> 1]!;
      results.push({
        name: `listen/in-memory/2ch/${SAMPLES_PER_FRAME}spf/every${every}${paced ? '/chunk-at-a-time' : ''}`,
        samplesPerSecond: TOTAL_SAMPLES / run.cpu,
        nsPerSample: (run.cpu * 1e9) / TOTAL_SAMPLES,
        passes,
        extra: { wallSamplesPerSecond: TOTAL_SAMPLES / run.wall, barePipelineSamplesPerSecond: TOTAL_SAMPLES / median(bareSeconds), overBarePipeline: median(ratios) },
      });
    }
  } finally {
    await rm(directory, { recursive: true, force: true });
  }
  return results;
}

// node dist/bench/cases/listen.js --stream SAMPLES OUT: one memory run (started by listenMemoryCases).
if (process.argv[1] !== undefined && import.meta.url === pathToFileURL(process.argv[1]).href && process.argv[2] === '--stream') {
  await listenStream(Number(process.argv[3]), process.argv[4]!);
}
