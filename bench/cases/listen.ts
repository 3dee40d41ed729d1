// `--tools` also measures listen's chain without a serial port: wire frames (2 channels, 256 samples a frame,
// the core cases' int16 signal) pushed in 4096-byte chunks from an in-memory byte source through the live session
// (decoder, pipeline) into the result writer through listen's rows sink (CSV, every row; --every 10000 beside it),
// as `listen` runs them: one session for all passes of a case, as one listen process keeps one chain. A pass is the
// signal's 2^22 samples (forwards, then backwards, so that the motion goes on without a jump; the frame counter goes
// on too), timed from its first chunk until the session has made its last position. Passes of the bare default
// pipeline alternate with the chain's in the same process (one before each and one after the last), and
// `overBarePipeline` is the median over the chain's passes of its speed over the mean of the two bare passes around
// it (process CPU time): the machine's speed drifts between passes, and a drift cancels in that mean. `…/every10000/session-per-pass` and every1 run a new session for each pass instead:
// the chain's set-up and the warm-up of its new closures in every pass (a major GC between two sessions drops their
// optimised code, and the next pass then runs partly unoptimised while about 20 functions are optimised again).
// Memory: the same chain over 10^7 and 10^8 samples (frames encoded as they are fed, --every 10000), each in a
// process of its own, and the growth of its peak resident memory between them: it must not grow with the run.
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
import { median, positiveIntegerFlag, type BenchResult } from '../harness.js';
import { benchSignal, BLOCK, TOTAL_SAMPLES } from './core.js';

// The calibration benchSignal draws its ellipse from (bench/cases/core.ts).
const ellipse: EllipseCalibration = { offsetX: 700, offsetY: -450, amplitudeX: 12000, amplitudeY: 10800, phaseErrorRad: 0.06 };
const SAMPLES_PER_FRAME = 256;
const CHUNK_BYTES = 4096;

function wireChunks(): Uint8Array[] {
  const { x, y } = benchSignal(TOTAL_SAMPLES);
  const bytes = new Uint8Array((TOTAL_SAMPLES / SAMPLES_PER_FRAME) * wireFrameLength(2, SAMPLES_PER_FRAME, 1));
  encodePass(x, y, 0, bytes);
  return chunksOf(bytes);
}

/** `bytes` as the source hands them out: CHUNK_BYTES at a time (views). */
function chunksOf(bytes: Uint8Array): Uint8Array[] {
  const chunks: Uint8Array[] = [];
  for (let at = 0; at < bytes.length; at += CHUNK_BYTES) chunks.push(bytes.subarray(at, Math.min(at + CHUNK_BYTES, bytes.length)));
  return chunks;
}

/** The frames of x and y into `bytes`, the first frame's sequence number `firstFrame` (mod 2^16). */
function encodePass(x: Int16Array, y: Int16Array, firstFrame: number, bytes: Uint8Array): void {
  const frameBytes = wireFrameLength(2, SAMPLES_PER_FRAME, 1);
  const interleaved = new Int16Array(2 * SAMPLES_PER_FRAME);
  for (let f = 0; f < x.length / SAMPLES_PER_FRAME; f++) {
    for (let i = 0; i < SAMPLES_PER_FRAME; i++) {
      interleaved[2 * i] = x[f * SAMPLES_PER_FRAME + i]!;
      interleaved[2 * i + 1] = y[f * SAMPLES_PER_FRAME + i]!;
    }
    encodeWireFrame({ sequence: (firstFrame + f) % 65536, channelCount: 2, samplesPerFrame: SAMPLES_PER_FRAME, sampleRateHz: 10_000_000 }, interleaved, bytes, f * frameBytes);
  }
}

/**
 * Passes of a session before those measured: V8 optimises the chain's functions over the first two or three (those
 * called once a block later than those called once a frame), the first passes taking up to twice the CPU time.
 */
const WARM_UP_PASSES = 3;

const track = { axes: [{ wavelengthM: 632.9908e-9, fold: 2, refractiveIndex: 1, calibration: ellipse }] };

/**
 * Listen's chain over WARM_UP_PASSES + `passes` passes in one session, a pass of `bare` before each measured one.
 * Queued: every chunk of a pass written at once, so chunks wait in the session's input and are taken together (up
 * to 16 KiB); paced: one chunk per turn of the event loop, each a block of its own, as from a port that the chain
 * keeps up with.
 */
async function listenPasses(out: string, every: number, paced: boolean, passes: number, bare: () => number): Promise<{ runs: { wall: number; cpu: number }[]; bareSeconds: number[] }> {
  const forwards = benchSignal(TOTAL_SAMPLES);
  const backwards = { x: forwards.x.slice().reverse(), y: forwards.y.slice().reverse() };
  const frames = TOTAL_SAMPLES / SAMPLES_PER_FRAME;
  const bytes = new Uint8Array(frames * wireFrameLength(2, SAMPLES_PER_FRAME, 1));
  const chunks = chunksOf(bytes);
  const writer = await createResultWriter(out, { format: 'csv', every });
  const source = createManualByteSource();
  const session = createLiveSession({ source, track, maxBufferedBytes: 2 ** 30, sinks: [{ name: 'rows', positions: resultRows(writer) }] }).start();
  let stopped: unknown = null;
  session.done.then(
    () => (stopped ??= new Error('the session ended before its passes')),
    (error: unknown) => (stopped = error),
  );
  source.linkUp();
  const runs: { wall: number; cpu: number }[] = [];
  const bareSeconds: number[] = [];
  for (let pass = 0; pass < WARM_UP_PASSES + passes; pass++) {
    // Encoded before the pass, outside its span; the session has taken every chunk of the pass before.
    const { x, y } = pass % 2 === 0 ? forwards : backwards;
    encodePass(x, y, pass * frames, bytes);
    const measured = pass >= WARM_UP_PASSES;
    if (measured) bareSeconds.push(bare());
    const wallStart = process.hrtime.bigint();
    const cpuStart = process.cpuUsage();
    // Indexed: the loop is inside the timed span, and for-of's iterator results would be the bench's garbage, not the chain's.
    for (let k = 0; k < chunks.length; k++) {
      source.write(chunks[k]!);
      if (paced) await new Promise((resolve) => setImmediate(resolve));
    }
    // The session takes queued chunks in microtasks after the writes (and after its sink's writes): a turn of the
    // event loop comes after them.
    while (session.progress.samplesProcessed < (pass + 1) * TOTAL_SAMPLES) {
      if (stopped !== null) throw stopped;
      await new Promise((resolve) => setImmediate(resolve));
    }
    const cpu = process.cpuUsage(cpuStart);
    const wall = Number(process.hrtime.bigint() - wallStart) / 1e9;
    if (measured) runs.push({ wall, cpu: (cpu.user + cpu.system) / 1e6 });
  }
  source.end();
  const summary = await session.done;
  await writer.close();
  if (summary.stopReason !== 'source ended' || summary.gaps.length > 0 || summary.progress.countLost) {
    throw new Error(`listen chain: ${summary.stopReason}, ${summary.gaps.length} gaps, count lost ${summary.progress.countLost}`);
  }
  return { runs, bareSeconds };
}

/** One run of the chain in a session of its own (every chunk written at once; see listenPasses). */
async function listenOnce(chunks: readonly Uint8Array[], out: string, every: number): Promise<{ wall: number; cpu: number }> {
  const writer = await createResultWriter(out, { format: 'csv', every });
  const source = createManualByteSource();
  const wallStart = process.hrtime.bigint();
  const cpuStart = process.cpuUsage();
  const session = createLiveSession({ source, track, maxBufferedBytes: 2 ** 30, sinks: [{ name: 'rows', positions: resultRows(writer) }] }).start();
  source.linkUp();
  for (let k = 0; k < chunks.length; k++) source.write(chunks[k]!);
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
    track,
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

/**
 * every, paced, one session per pass. Every row in a session per pass: one session would write a file of ~1.5 GB,
 * and the case is about the rows' formatting anyway. The one-session cases first: the type feedback that the
 * sessions of a case before left (other objects at the same code) slowed the every10000 case (0.64-0.67 after
 * every1's eight sessions, 0.70-0.72 alone).
 */
const IN_MEMORY_CASES = [
  [10_000, false, false],
  [10_000, true, false],
  [1, false, true],
  [10_000, false, true],
] as const;

/** `only`: the cases whose name ends with it (e.g. `every10000`), the others not run. */
export async function listenCases(passes = 7, only?: string): Promise<BenchResult[]> {
  const bare = barePipeline();
  const directory = await mkdtemp(join(tmpdir(), 'fringetally-bench-listen-'));
  const results: BenchResult[] = [];
  let chunks: Uint8Array[] | null = null;
  try {
    for (const [every, paced, perPass] of IN_MEMORY_CASES) {
      const name = `listen/in-memory/2ch/${SAMPLES_PER_FRAME}spf/every${every}${paced ? '/chunk-at-a-time' : ''}${perPass && every !== 1 ? '/session-per-pass' : ''}`;
      if (only !== undefined && !name.endsWith(only)) continue;
      // Warm-up, then passes of the chain and of the bare pipeline alternating; medians, and the median of the
      // ratios of each chain pass's samples per second to the bare passes' around it (process CPU time).
      bare();
      let runs: { wall: number; cpu: number }[] = [];
      let bareSeconds: number[] = [];
      if (perPass) {
        chunks ??= wireChunks();
        await listenOnce(chunks, join(directory, 'rows.csv'), every);
        for (let pass = 0; pass < passes; pass++) {
          bareSeconds.push(bare());
          runs.push(await listenOnce(chunks, join(directory, 'rows.csv'), every));
        }
      } else {
        ({ runs, bareSeconds } = await listenPasses(join(directory, 'rows.csv'), every, paced, passes, bare));
      }
      bareSeconds.push(bare());
      const ratios = runs.map((run, pass) => (bareSeconds[pass]! + bareSeconds[pass + 1]!) / 2 / run.cpu);
      const run = [...runs].sort((a, b) => a.cpu - b.cpu)[runs.length >> 1]!;
      results.push({
        name,
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
// node dist/bench/cases/listen.js --cases [--passes N] [--only SUFFIX]: the in-memory cases alone, as `--tools` runs
// them (e.g. `--only every10000` for that case alone, without the every-row case run before it there).
if (process.argv[1] !== undefined && import.meta.url === pathToFileURL(process.argv[1]).href) {
  const argv = process.argv.slice(2);
  if (argv[0] === '--stream') await listenStream(Number(argv[1]), argv[2]!);
  else if (argv[0] === '--cases') {
    const only = argv.indexOf('--only');
    for (const result of await listenCases(positiveIntegerFlag(argv, '--passes'), only === -1 ? undefined : argv[only + 1])) {
      const { wallSamplesPerSecond, barePipelineSamplesPerSecond, overBarePipeline } = result.extra!;
      console.log(
        `${result.name}: ${(result.samplesPerSecond / 1e6).toFixed(2)} M samples/s CPU, ${(wallSamplesPerSecond! / 1e6).toFixed(2)} wall; ` +
          `bare pipeline ${(barePipelineSamplesPerSecond! / 1e6).toFixed(2)}; overBarePipeline ${overBarePipeline!.toFixed(3)}`,
      );
    }
  }
}
