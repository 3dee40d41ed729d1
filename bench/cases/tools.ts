// `--tools`: calibrate and replay end to end, as a user runs them: a process of the tool per run, start-up
// included, on an int16 WAV of an invented signal (bench/cases/capture.ts `generate`), replay with
// `--every 10000`, its analyses on a second thread (the default) and in line. Figures: wall-clock samples/s, the
// process's CPU time and peak resident memory (read by
// bench/report-usage.ts), and for memory the same replay on a short and a long capture: the peak must not grow
// with the run. Beside them the start-up alone (`replay --help`) and the reading of the capture alone (its blocks
// in this process, as the tools read them), which bound what any run can reach.
import { spawnSync } from 'node:child_process';
import { mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import { median, type BenchResult } from '../harness.js';
import { openCapture } from '../../src/io/capture/index.js';
import { generate } from './capture.js';
import { TOTAL_SAMPLES } from './core.js';
import { barePipeline } from './listen.js';

const here = dirname(fileURLToPath(import.meta.url));
const TOOL = resolve(here, '../../tools/fringetally.js');
const USAGE = resolve(here, '../report-usage.js');

interface ToolRun {
  wallSeconds: number;
  cpuSeconds: number;
  maxRssKiB: number;
}

function runTool(args: readonly string[]): ToolRun {
  const start = process.hrtime.bigint();
  const child = spawnSync(process.execPath, ['--import', USAGE, TOOL, ...args], { stdio: ['ignore', 'ignore', 'pipe', 'pipe'], encoding: 'utf8', maxBuffer: 1 << 24 });
  const wallSeconds = Number(process.hrtime.bigint() - start) / 1e9;
  if (child.status !== 0) throw new Error(`fringetally ${args.join(' ')} exited with ${child.status}: ${child.stderr}`);
  const usage = JSON.parse(String(child.output[3])) as { cpuSeconds: number; maxRssKiB: number };
  return { wallSeconds, ...usage };
}

/**
 * `passes` runs, each right after a pass of the bare default pipeline in this process (`barePipeline`): the median
 * run by wall time, and the median of the pairs' ratios (the run's samples per second, wall clock with its start-up,
 * over the bare pipeline's, in CPU time). On a shared machine both speeds move between minutes; a pair's ratio much
 * less.
 */
function pairedRuns(args: readonly string[], samples: number, passes: number, bare: () => number): { run: ToolRun; overBarePipeline: number; barePipelineSamplesPerSecond: number } {
  const runs: ToolRun[] = [];
  const ratios: number[] = [];
  const bareRates: number[] = [];
  for (let pass = 0; pass < passes; pass++) {
    const bareRate = TOTAL_SAMPLES / bare();
    const run = runTool(args);
    runs.push(run);
    bareRates.push(bareRate);
    ratios.push(samples / run.wallSeconds / bareRate);
  }
  return { run: [...runs].sort((a, b) => a.wallSeconds - b.wallSeconds)[runs.length >> 1]!, overBarePipeline: median(ratios), barePipelineSamplesPerSecond: median(bareRates) };
}

function pairedResult(name: string, samples: number, paired: ReturnType<typeof pairedRuns>): BenchResult {
  return result(name, samples, paired.run, { overBarePipeline: paired.overBarePipeline, barePipelineSamplesPerSecond: paired.barePipelineSamplesPerSecond });
}

/** The median run by wall time of `passes` runs. */
function medianRun(args: readonly string[], passes: number): ToolRun {
  const runs = Array.from({ length: passes }, () => runTool(args)).sort((a, b) => a.wallSeconds - b.wallSeconds);
  return runs[runs.length >> 1]!;
}

function result(name: string, samples: number, run: ToolRun, extra: Record<string, number> = {}): BenchResult {
  return {
    name,
    samplesPerSecond: samples / run.wallSeconds,
    nsPerSample: (run.wallSeconds * 1e9) / samples,
    passes: 1,
    extra: { samples, cpuSamplesPerSecond: samples / run.cpuSeconds, peakRssMiB: run.maxRssKiB / 1024, ...extra },
  };
}

export interface ToolBenchOptions {
  /** Samples of the capture for calibrate and replay; default 3e7. */
  readonly samples?: number;
  /** Samples of the short and the long capture for the memory case; default 1e7 and 1e8. */
  readonly memorySamples?: readonly [number, number];
  /** Runs per case (median by wall time); default 3. */
  readonly passes?: number;
  /** Runs of calibrate and replay, each right after a pass of the bare pipeline (see pairedRuns); default 5. */
  readonly pairedPasses?: number;
}

export async function toolCases(options: ToolBenchOptions = {}): Promise<BenchResult[]> {
  const samples = options.samples ?? 3e7;
  const [short, long] = options.memorySamples ?? [1e7, 1e8];
  const passes = options.passes ?? 3;
  // Runs of calibrate and replay, each paired with a pass of the bare pipeline.
  const pairedPasses = options.pairedPasses ?? 5;
  const directory = await mkdtemp(join(tmpdir(), 'fringetally-bench-tools-'));
  const measure = ['--wavelength-nm', '632.9908', '--fold', '2', '--quiet'];
  const results: BenchResult[] = [];
  try {
    // The tool's start-up alone (the command loaded, its help printed): what every run pays before its first sample.
    const startUp = medianRun(['replay', '--help'], 2 * passes + 1);
    results.push({ name: 'replay/start-up', samplesPerSecond: Number.NaN, nsPerSample: Number.NaN, passes: 2 * passes + 1, extra: { wallSeconds: startUp.wallSeconds, cpuSeconds: startUp.cpuSeconds } });
    const capture = (await generate(join(directory, 'capture.wav'), 'wav', 'int16', samples)).path;
    // Reading alone, in 4096-sample blocks as calibrate and replay take them (median wall time of the passes).
    const reads: number[] = [];
    for (let pass = 0; pass < passes; pass++) {
      const start = process.hrtime.bigint();
      const opened = await openCapture(capture, { blockSize: 4096 });
      let read = 0;
      for await (const block of opened.blocks()) read += block.length;
      await opened.close();
      if (read !== samples) throw new Error(`read ${read} of ${samples} samples`);
      reads.push(Number(process.hrtime.bigint() - start) / 1e9);
    }
    const readSeconds = reads.sort((a, b) => a - b)[reads.length >> 1]!;
    results.push({ name: `capture/wav/int16/${samples}/read-alone`, samplesPerSecond: samples / readSeconds, nsPerSample: (readSeconds * 1e9) / samples, passes, extra: { wallSeconds: readSeconds } });
    const calibration = join(directory, 'calibration.json');
    const bare = barePipeline();
    bare(); // warm-up
    const calibrate = pairedRuns(['calibrate', capture, '--out', calibration, '--quiet'], samples, pairedPasses, bare);
    results.push(pairedResult(`calibrate/wav/int16/${samples}/end-to-end`, samples, calibrate));
    const replayArgs = (file: string) => ['replay', file, '--calibration', calibration, '--every', '10000', '--out', join(directory, 'result.csv'), ...measure];
    results.push(pairedResult(`replay/wav/int16/${samples}/every10000/end-to-end`, samples, pairedRuns(replayArgs(capture), samples, pairedPasses, bare)));
    // The same with the analyses in line (one thread): what the analysis thread buys on this machine.
    results.push(result(`replay/wav/int16/${samples}/every10000/end-to-end/analyses-inline`, samples, medianRun([...replayArgs(capture), '--analysis-thread', 'off'], passes)));
    await rm(capture);
    const peaks: ToolRun[] = [];
    for (const length of [short, long]) {
      const file = (await generate(join(directory, `memory-${length}.wav`), 'wav', 'int16', length)).path;
      const run = runTool(replayArgs(file));
      peaks.push(run);
      results.push(result(`replay/wav/int16/${length}/every10000/memory`, length, run));
      await rm(file);
    }
    results.push({
      name: `replay/wav/int16/${short}-to-${long}/peak-rss-growth`,
      samplesPerSecond: Number.NaN,
      nsPerSample: Number.NaN,
      passes: 1,
      extra: { peakRssGrowthMiB: (peaks[1]!.maxRssKiB - peaks[0]!.maxRssKiB) / 1024 },
    });
  } finally {
    await rm(directory, { recursive: true, force: true });
  }
  return results;
}
