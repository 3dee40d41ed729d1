// Benchmark cases of the stream layer: the axis builder's throughput on int16 frame blocks (one and three
// axes) beside the bare pipeline on the same samples and a one-event-per-sample rxjs baseline, and the
// latency from a block entering to its position being emitted.

import { Subject, type Subscription } from 'rxjs';
import { type AlarmEvent, type EllipseCalibration, type PipelineOptions } from '../../src/core/index.js';
import { createPipeline } from '../../src/accel/index.js';
import { createAxes, type FrameBlock } from '../../src/stream/index.js';
import { defaultMeasureOptions, measure, median, type BenchCase, type BenchResult, type MeasureOptions } from '../harness.js';
import { benchSignal, BLOCK } from './core.js';

const SAMPLES_PER_CHANNEL = 1 << 20;
const PER_SAMPLE_SAMPLES = 1 << 16;
const LATENCY_BLOCKS = 2000;
const ellipse: EllipseCalibration = { offsetX: 700, offsetY: -450, amplitudeX: 12000, amplitudeY: 10800, phaseErrorRad: 0.06 };
const axisOptions: PipelineOptions = { rateHz: 10e6, wavelengthM: 632.9908e-9, fold: 2, calibration: ellipse, adc: { kind: 'int16' } };

/** The bench signal on `axisCount` axes (the same motion on each: an invented scenario), as interleaved frames. */
function frames(axisCount: number): FrameBlock[] {
  const { x, y } = benchSignal(SAMPLES_PER_CHANNEL);
  const channelCount = 2 * axisCount;
  const blocks: FrameBlock[] = [];
  for (let start = 0; start < SAMPLES_PER_CHANNEL; start += BLOCK) {
    const samples = new Int16Array(channelCount * BLOCK);
    for (let s = 0; s < BLOCK; s++) {
      for (let k = 0; k < axisCount; k++) {
        samples[s * channelCount + 2 * k] = x[start + s]!;
        samples[s * channelCount + 2 * k + 1] = y[start + s]!;
      }
    }
    blocks.push({ samples, channelCount, samplesPerFrame: BLOCK });
  }
  return blocks;
}

/** The axis builder with a 10 Hz subscriber and an alarm subscriber; samples counted per axis (channels / 2). */
function axesCase(name: string, axisCount: number): BenchCase {
  const blocks = frames(axisCount);
  const source = new Subject<FrameBlock>();
  const axes = createAxes(source, { axes: Array.from({ length: axisCount }, (_, k) => ({ ...axisOptions, name: `A${k}` })) });
  const subscriptions: Subscription[] = [];
  return {
    name,
    samplesPerPass: SAMPLES_PER_CHANNEL * axisCount,
    setup() {
      subscriptions.push(axes.update$({ updateHz: 10, trace: true }).subscribe(), axes.alarms$.subscribe());
    },
    pass() {
      for (const block of blocks) source.next(block);
    },
    // The 10 Hz update timer would otherwise keep the process alive after the benchmark.
    teardown() {
      for (const subscription of subscriptions.splice(0)) subscription.unsubscribe();
      source.complete();
    },
  };
}

/** Baseline: the bare pipeline on the same samples, already split per axis: the accelerated one the axes use. */
function directCase(name: string): BenchCase {
  const { x, y } = benchSignal(SAMPLES_PER_CHANNEL);
  const pipeline = createPipeline(axisOptions);
  const output = { positionM: new Float64Array(BLOCK), velocityMS: new Float64Array(BLOCK), level: new Float32Array(BLOCK), flags: new Uint8Array(BLOCK) };
  const events: AlarmEvent[] = [];
  const xs = Array.from({ length: SAMPLES_PER_CHANNEL / BLOCK }, (_, b) => x.subarray(b * BLOCK, (b + 1) * BLOCK));
  const ys = Array.from({ length: SAMPLES_PER_CHANNEL / BLOCK }, (_, b) => y.subarray(b * BLOCK, (b + 1) * BLOCK));
  return {
    name,
    samplesPerPass: SAMPLES_PER_CHANNEL,
    pass() {
      for (let b = 0; b < xs.length; b++) {
        events.length = 0;
        pipeline.process(xs[b]!, ys[b]!, BLOCK, output, events);
      }
    },
  };
}

/** Baseline: one rxjs event per sample into the pipeline, what the block design avoids. */
function perSampleCase(name: string): BenchCase {
  const { x, y } = benchSignal(PER_SAMPLE_SAMPLES);
  const pipeline = createPipeline(axisOptions);
  const output = { positionM: new Float64Array(1), velocityMS: new Float64Array(1), level: new Float32Array(1), flags: new Uint8Array(1) };
  const events: AlarmEvent[] = [];
  const source = new Subject<number>();
  const px = new Int16Array(1);
  const py = new Int16Array(1);
  let sink = 0;
  return {
    name,
    samplesPerPass: PER_SAMPLE_SAMPLES,
    setup() {
      source.subscribe((i) => {
        px[0] = x[i]!;
        py[0] = y[i]!;
        events.length = 0;
        pipeline.process(px, py, 1, output, events);
        sink += output.positionM[0]!;
      });
    },
    pass() {
      for (let i = 0; i < PER_SAMPLE_SAMPLES; i++) source.next(i);
      if (Number.isNaN(sink)) throw new Error('bench signal gave a NaN position');
    },
  };
}

function percentile(sorted: readonly number[], fraction: number): number {
  return sorted[Math.min(sorted.length - 1, Math.floor(fraction * sorted.length))]!;
}

/**
 * Latency from `next(block)` to the emission of that block's position by a per-block subscriber (one axis).
 * With `updateHz` set, a subscriber waits up to 1/updateHz more for its tick, by design.
 */
function latency(name: string): BenchResult {
  const blocks = frames(1);
  const source = new Subject<FrameBlock>();
  const axes = createAxes(source, { axes: [axisOptions] });
  let emittedAt = 0n;
  axes.axes[0]!.position$().subscribe(() => (emittedAt = process.hrtime.bigint()));
  const nanoseconds: number[] = [];
  for (let b = 0; b < LATENCY_BLOCKS + 50; b++) {
    const start = process.hrtime.bigint();
    source.next(blocks[b % blocks.length]!);
    if (b >= 50) nanoseconds.push(Number(emittedAt - start)); // the first 50 blocks warm up
  }
  source.complete();
  const sorted = [...nanoseconds].sort((a, b) => a - b);
  const totalNs = nanoseconds.reduce((sum, value) => sum + value, 0);
  return {
    name,
    samplesPerSecond: (LATENCY_BLOCKS * BLOCK) / (totalNs / 1e9),
    nsPerSample: totalNs / (LATENCY_BLOCKS * BLOCK),
    passes: LATENCY_BLOCKS,
    extra: {
      p50Us: percentile(sorted, 0.5) / 1e3,
      p90Us: percentile(sorted, 0.9) / 1e3,
      p99Us: percentile(sorted, 0.99) / 1e3,
      maxUs: sorted[sorted.length - 1]! / 1e3,
    },
  };
}

/**
 * The axis builder over the bare pipeline in one process: passes of the two alternate, and the ratio is the median
 * of each pair's ratio (process CPU time), so a load that comes and goes weighs on both sides alike. The
 * separate cases above give each its own process; this one gives the ratio the 1.1× target is about.
 */
function pairedRatio(name: string, options: MeasureOptions): BenchResult {
  const axes = axesCase(name, 1);
  const direct = directCase(name);
  axes.setup?.();
  for (let i = 0; i < options.warmupPasses; i++) {
    direct.pass();
    axes.pass();
  }
  // Process CPU time, as --reference measures: on a loaded machine, wall-clock time also counts the waits for a core.
  const time = (pass: () => void) => {
    const start = process.cpuUsage();
    pass();
    const used = process.cpuUsage(start);
    return (used.user + used.system) / 1e6;
  };
  const axesSeconds: number[] = [];
  const directSeconds: number[] = [];
  const ratios: number[] = [];
  for (let i = 0; i < options.passes; i++) {
    directSeconds.push(time(() => direct.pass()));
    axesSeconds.push(time(() => axes.pass()));
    ratios.push(axesSeconds[i]! / directSeconds[i]!);
  }
  axes.teardown?.();
  const perPass = median(axesSeconds);
  return {
    name,
    samplesPerSecond: SAMPLES_PER_CHANNEL / perPass,
    nsPerSample: (perPass * 1e9) / SAMPLES_PER_CHANNEL,
    passes: options.passes,
    extra: { directNsPerSample: (median(directSeconds) * 1e9) / SAMPLES_PER_CHANNEL, ratio: median(ratios) },
  };
}

const CASES: ReadonlyArray<readonly [string, (name: string) => BenchCase]> = [
  [`baseline/pipeline-direct/1axis/int16/block${BLOCK}`, directCase],
  [`axes/1axis/int16/block${BLOCK}/update10Hz`, (name) => axesCase(name, 1)],
  [`axes/3axis/int16/block${BLOCK}/update10Hz`, (name) => axesCase(name, 3)],
  ['baseline/rxjs-per-sample/1axis/int16', perSampleCase],
];
const LATENCY_CASE = `axes/1axis/int16/block${BLOCK}/latency-per-block`;
const RATIO_CASE = `axes/1axis/int16/block${BLOCK}/update10Hz/over-pipeline-direct`;

/** The stream cases' names, for bench/run.ts, which measures each in a process of its own. */
export const streamCaseNames: readonly string[] = [...CASES.map(([name]) => name), RATIO_CASE, LATENCY_CASE];

/** One stream case by name, measured; null for another name. Ratios: `axes/1axis` over `baseline/pipeline-direct`. */
export function streamCase(name: string, options: MeasureOptions = defaultMeasureOptions): BenchResult | null {
  if (name === LATENCY_CASE) return latency(name);
  if (name === RATIO_CASE) return pairedRatio(name, { warmupPasses: options.warmupPasses, passes: 2 * options.passes + 1 });
  const entry = CASES.find(([caseName]) => caseName === name);
  return entry === undefined ? null : measure(entry[1](name), options);
}
