// Benchmark cases of the core stages and the whole (default) pipeline on int16 samples in 4096-sample blocks,
// with a naive per-sample baseline beside them so a ratio can be read.

import {
  createCorrection,
  createDisplacement,
  createPhaseTracker,
  createQuadratureSynthesizer,
  createSignalMonitor,
  type AlarmEvent,
  type EllipseCalibration,
} from '../../src/core/index.js';
// The default pipeline of the Node entry points (the fastest exact front end); plain-js in cases/accel.ts.
import { createPipeline } from '../../src/accel/index.js';
import type { BenchCase } from '../harness.js';

export const TOTAL_SAMPLES = 1 << 22;
export const BLOCK = 4096;
const RATE_HZ = 10e6;
const WAVELENGTH_M = 632.9908e-9;
const ellipse: EllipseCalibration = { offsetX: 700, offsetY: -450, amplitudeX: 12000, amplitudeY: 10800, phaseErrorRad: 0.06 };

/** An invented scenario: a stage oscillating ±20 fringes while drifting, sampled as int16 with noise. */
export function benchSignal(length: number): { x: Int16Array; y: Int16Array } {
  const phase = new Float64Array(length);
  for (let i = 0; i < length; i++) phase[i] = 2 * Math.PI * (20 * Math.sin((2 * Math.PI * i) / 200_000) + i * 1e-4);
  const x = new Int16Array(length);
  const y = new Int16Array(length);
  createQuadratureSynthesizer({ ellipse, noiseRms: 30, adc: { kind: 'int16' }, seed: 5 }).process(phase, x, y, length);
  return { x, y };
}

export function coreCases(): BenchCase[] {
  const { x, y } = benchSignal(TOTAL_SAMPLES);
  const u = new Float64Array(TOTAL_SAMPLES);
  const v = new Float64Array(TOTAL_SAMPLES);
  const level = new Float32Array(TOTAL_SAMPLES);
  const flags = new Uint8Array(TOTAL_SAMPLES);
  const turns = new Float64Array(TOTAL_SAMPLES);
  const phaseRad = new Float64Array(TOTAL_SAMPLES);
  const stepRad = new Float64Array(TOTAL_SAMPLES);
  const positionM = new Float64Array(BLOCK);
  const velocityMS = new Float64Array(BLOCK);
  const events: AlarmEvent[] = [];
  const blocks = TOTAL_SAMPLES / BLOCK;
  const view = <T extends { subarray(start: number, end: number): T }>(array: T, b: number) => array.subarray(b * BLOCK, (b + 1) * BLOCK);
  // Views are made once here so that the timed passes measure the stages, not the slicing.
  const xs = Array.from({ length: blocks }, (_, b) => view(x, b));
  const ys = Array.from({ length: blocks }, (_, b) => view(y, b));
  const us = Array.from({ length: blocks }, (_, b) => view(u, b));
  const vs = Array.from({ length: blocks }, (_, b) => view(v, b));
  const levels = Array.from({ length: blocks }, (_, b) => view(level, b));
  const flagss = Array.from({ length: blocks }, (_, b) => view(flags, b));
  const trackerOut = Array.from({ length: blocks }, (_, b) => ({
    turns: view(turns, b),
    phaseRad: view(phaseRad, b),
    stepRad: view(stepRad, b),
    flags: view(flags, b),
  }));

  const correction = createCorrection({ calibration: ellipse });
  const monitor = createSignalMonitor({ adc: { kind: 'int16' } });
  const tracker = createPhaseTracker({ rateHz: RATE_HZ });
  const displacement = createDisplacement({ wavelengthM: WAVELENGTH_M, fold: 2, rateHz: RATE_HZ });
  const pipeline = createPipeline({ rateHz: RATE_HZ, wavelengthM: WAVELENGTH_M, fold: 2, calibration: ellipse, adc: { kind: 'int16' } });
  const output = { positionM, velocityMS, level: new Float32Array(BLOCK), flags: new Uint8Array(BLOCK) };

  // Each stage reads what the stages before it write: the stage cases compute all of it once in their setup,
  // so that any case can run alone. The pipeline case skips it: those calls would give the stages' code type
  // feedback from call sites the pipeline does not have.
  let prepared = false;
  const prepare = () => {
    if (prepared) return;
    prepared = true;
    for (let b = 0; b < blocks; b++) {
      correction.process(xs[b]!, ys[b]!, us[b]!, vs[b]!, BLOCK);
      monitor.process(xs[b]!, ys[b]!, us[b]!, vs[b]!, BLOCK, b * BLOCK, levels[b]!, flagss[b]!, events);
      tracker.process(us[b]!, vs[b]!, levels[b]!, BLOCK, b * BLOCK, trackerOut[b]!, events);
    }
    events.length = 0;
  };

  const stage = (name: string, block: (b: number) => void, setup: () => void = prepare): BenchCase => ({
    name,
    samplesPerPass: TOTAL_SAMPLES,
    setup,
    pass() {
      for (let b = 0; b < blocks; b++) block(b);
      events.length = 0;
    },
  });

  return [
    stage('correction/int16/block4096', (b) => correction.process(xs[b]!, ys[b]!, us[b]!, vs[b]!, BLOCK)),
    stage('monitor/int16/block4096', (b) => monitor.process(xs[b]!, ys[b]!, us[b]!, vs[b]!, BLOCK, b * BLOCK, levels[b]!, flagss[b]!, events)),
    stage('tracker/block4096', (b) => tracker.process(us[b]!, vs[b]!, levels[b]!, BLOCK, b * BLOCK, trackerOut[b]!, events)),
    stage('displacement/block4096', (b) => {
      const out = trackerOut[b]!;
      displacement.process(out.turns, out.phaseRad, out.stepRad, BLOCK, positionM, velocityMS);
    }),
    stage('pipeline/int16/block4096', (b) => pipeline.process(xs[b]!, ys[b]!, BLOCK, output, events), () => pipeline.reset()),
    naiveBaseline(x, y),
  ];
}

interface NaiveSample {
  x: number;
  y: number;
}
interface NaiveResult {
  positionM: number;
  velocityMS: number;
  level: number;
  alarms: string[];
}

/** One object and one callback per sample, Math.atan2, nothing precomputed: the way not to do it. */
function naiveBaseline(x: Int16Array, y: Int16Array): BenchCase {
  let lastPhase = 0;
  let turns = 0;
  let lastPosition = 0;
  let checksum = 0;
  const handle = (sample: NaiveSample, emit: (result: NaiveResult) => void) => {
    const u = (sample.x - ellipse.offsetX) / ellipse.amplitudeX;
    const v = (-(sample.x - ellipse.offsetX) * Math.sin(ellipse.phaseErrorRad) / ellipse.amplitudeX + (sample.y - ellipse.offsetY) / ellipse.amplitudeY) / Math.cos(ellipse.phaseErrorRad);
    const phase = Math.atan2(v, u);
    let d = phase - lastPhase;
    if (d > Math.PI) turns -= 1;
    else if (d <= -Math.PI) turns += 1;
    lastPhase = phase;
    const positionM = (turns + phase / (2 * Math.PI)) * (WAVELENGTH_M / 2);
    const level = Math.sqrt(u * u + v * v);
    const alarms: string[] = [];
    if (level < 0.3) alarms.push('low_signal');
    emit({ positionM, velocityMS: (positionM - lastPosition) * RATE_HZ, level, alarms });
    lastPosition = positionM;
    d = 0;
  };
  const sink = (result: NaiveResult) => {
    checksum += result.positionM;
  };
  return {
    name: 'baseline/naive-per-sample/int16',
    samplesPerPass: TOTAL_SAMPLES,
    pass() {
      for (let i = 0; i < TOTAL_SAMPLES; i++) handle({ x: x[i]!, y: y[i]! }, sink);
      if (checksum === 42) process.stdout.write('');
    },
  };
}

/** Heap growth over a long run of the pipeline in 4096-sample blocks (it must stay flat). */
export function heapGrowth(totalSamples: number): { samples: number; heapGrowthBytes: number; seconds: number } {
  const gc = (globalThis as { gc?: () => void }).gc;
  const { x, y } = benchSignal(1 << 20);
  const pipeline = createPipeline({ rateHz: RATE_HZ, wavelengthM: WAVELENGTH_M, fold: 2, calibration: ellipse });
  const output = { positionM: new Float64Array(BLOCK), velocityMS: new Float64Array(BLOCK), level: new Float32Array(BLOCK), flags: new Uint8Array(BLOCK) };
  const events: AlarmEvent[] = [];
  const blocksInSignal = x.length / BLOCK;
  const xs = Array.from({ length: blocksInSignal }, (_, b) => x.subarray(b * BLOCK, (b + 1) * BLOCK));
  const ys = Array.from({ length: blocksInSignal }, (_, b) => y.subarray(b * BLOCK, (b + 1) * BLOCK));
  // Warm up, then measure from a collected heap.
  for (let b = 0; b < blocksInSignal; b++) pipeline.process(xs[b]!, ys[b]!, BLOCK, output, events);
  gc?.();
  const before = process.memoryUsage().heapUsed;
  const start = process.hrtime.bigint();
  const blocks = Math.ceil(totalSamples / BLOCK);
  for (let b = 0; b < blocks; b++) {
    pipeline.process(xs[b % blocksInSignal]!, ys[b % blocksInSignal]!, BLOCK, output, events);
    events.length = 0;
  }
  const seconds = Number(process.hrtime.bigint() - start) / 1e9;
  gc?.();
  return { samples: blocks * BLOCK, heapGrowthBytes: process.memoryUsage().heapUsed - before, seconds };
}
