// Benchmark of the capture analyses' per-sample work (the analysis worker's share of calibrate and replay): the
// periodic-error bins, the phase-domain estimator, the radius residual and the model watch, each with the core's own loops and with the
// WebAssembly kernels of src/accel/analysis-kernels.ts, in alternating passes of one process, timed in process CPU
// time. The signal is invented: the capture benchmark's (bench/cases/capture.ts), 100 samples a fringe and slowly
// faster, with noise, through the default pipeline in blocks of 4096 as replay runs it.
import {
  createCorrection,
  createModelWatch,
  createPeriodicErrorAnalyzer,
  createPhaseDomainEstimator,
  createRandom,
  createResidualAnalyzer,
  type AlarmEvent,
  type EllipseCalibration,
} from '../../src/core/index.js';
import { createModelWatchChunkSums, createPeriodicErrorBinning, createPhaseDomainSums, createPipeline, createResidualRun } from '../../src/accel/index.js';
import { median, type BenchResult } from '../harness.js';

const BLOCK = 4096;
/** Blocks analysed a pass: 2^18 samples, a quarter of a long capture's analysis budget. */
const BLOCKS = 64;
const SAMPLES = BLOCK * BLOCKS;
const WARMUP_PASSES = 5;
const PASSES = 15;
const calibration: EllipseCalibration = { offsetX: 0, offsetY: 0, amplitudeX: 30_000, amplitudeY: 24_000, phaseErrorRad: 0.05 };

interface Block {
  readonly unwrappedPhaseRad: Float64Array;
  readonly level: Float32Array;
  readonly u: Float64Array;
  readonly v: Float64Array;
}

/** The pipeline's phase and level, and the corrected pair, of the invented signal, block by block. */
function blocks(): Block[] {
  const pipeline = createPipeline({ rateHz: 1e6, wavelengthM: 632.9908e-9, fold: 2, calibration, adc: { kind: 'int16' } });
  const correction = createCorrection({ calibration });
  const random = createRandom(7);
  const x = new Float64Array(BLOCK);
  const y = new Float64Array(BLOCK);
  const events: AlarmEvent[] = [];
  const result: Block[] = [];
  for (let b = 0; b < BLOCKS; b++) {
    for (let i = 0; i < BLOCK; i++) {
      const k = b * BLOCK + i;
      const phase = 2 * Math.PI * 0.01 * k * (1 + 1e-9 * k);
      x[i] = Math.round(30_000 * Math.cos(phase) + 20 * random.gaussian());
      y[i] = Math.round(24_000 * Math.sin(phase + 0.05) + 20 * random.gaussian());
    }
    const output = {
      positionM: new Float64Array(BLOCK),
      velocityMS: new Float64Array(BLOCK),
      level: new Float32Array(BLOCK),
      flags: new Uint8Array(BLOCK),
      unwrappedPhaseRad: new Float64Array(BLOCK),
    };
    pipeline.process(x, y, BLOCK, output, events);
    const u = new Float64Array(BLOCK);
    const v = new Float64Array(BLOCK);
    correction.process(x, y, u, v, BLOCK);
    result.push({ unwrappedPhaseRad: output.unwrappedPhaseRad, level: output.level, u, v });
  }
  return result;
}

function cpuSeconds(): number {
  const { user, system } = process.cpuUsage();
  return (user + system) / 1e6;
}

type Analysis = (data: readonly Block[], valid: Uint8Array, accelerated: boolean) => number;

/** Each analysis a pass, new each pass (as a run creates them), over all blocks; returns a figure it found. */
const analyses: Record<string, Analysis> = {
  // The bins of the uncorrected phase's error (any finite values serve: the corrected u as the error).
  'periodic-error-bins': (data, valid, accelerated) => {
    const binning = accelerated ? createPeriodicErrorBinning() : null;
    const analyzer = createPeriodicErrorAnalyzer(binning === null ? {} : { binning });
    for (const block of data) analyzer.add(block.unwrappedPhaseRad, block.u, BLOCK, valid);
    return analyzer.summary().samples;
  },
  'phase-domain': (data, valid, accelerated) => {
    const sums = accelerated ? createPhaseDomainSums() : null;
    const estimator = createPhaseDomainEstimator(sums === null ? {} : { sums });
    for (const block of data) estimator.process(block.unwrappedPhaseRad, valid, BLOCK);
    return estimator.windows.used;
  },
  residual: (data, valid, accelerated) => {
    const run = accelerated ? createResidualRun() : null;
    const residual = createResidualAnalyzer(run === null ? {} : { run });
    for (const block of data) residual.add(block.u, block.v, BLOCK, valid);
    return residual.summary().samples;
  },
  'model-watch': (data, _valid, accelerated) => {
    const chunkSums = accelerated ? createModelWatchChunkSums() : null;
    const watch = createModelWatch(chunkSums === null ? {} : { chunkSums });
    const events: { sampleIndex: number }[] = [];
    for (let b = 0; b < data.length; b++) watch.processRadius(data[b]!.level, BLOCK, b * BLOCK, events as never);
    return watch.meanRadius;
  },
};

/**
 * Per analysis, the core's loops and the kernels in alternating passes (so both see the same load), medians of
 * their CPU time a pass, and their ratio (`acceleratedOverCore`, below 1 is faster); then all of them together.
 */
export function analysesCases(): BenchResult[] {
  const data = blocks();
  const valid = new Uint8Array(BLOCK).fill(1);
  const results: BenchResult[] = [];
  const names = Object.keys(analyses);
  const time = (analysis: Analysis, accelerated: boolean): number => {
    const start = cpuSeconds();
    analysis(data, valid, accelerated);
    return cpuSeconds() - start;
  };
  const all: Record<'core' | 'accelerated', number[]> = { core: [], accelerated: [] };
  for (const name of names) {
    const analysis = analyses[name]!;
    const seconds: Record<'core' | 'accelerated', number[]> = { core: [], accelerated: [] };
    for (let pass = 0; pass < WARMUP_PASSES + PASSES; pass++) {
      const core = time(analysis, false);
      const accelerated = time(analysis, true);
      if (pass < WARMUP_PASSES) continue;
      seconds.core.push(core);
      seconds.accelerated.push(accelerated);
    }
    const ratio = median(seconds.accelerated.map((value, pass) => value / seconds.core[pass]!));
    for (const kind of ['core', 'accelerated'] as const) {
      const perPass = median(seconds[kind]);
      all[kind].push(perPass);
      results.push({
        name: `analyses/${name}/${kind}`,
        samplesPerSecond: SAMPLES / perPass,
        nsPerSample: (perPass * 1e9) / SAMPLES,
        passes: PASSES,
        ...(kind === 'accelerated' ? { extra: { acceleratedOverCore: ratio } } : {}),
      });
    }
  }
  const core = all.core.reduce((sum, value) => sum + value, 0);
  const accelerated = all.accelerated.reduce((sum, value) => sum + value, 0);
  results.push({
    name: 'analyses/all/accelerated',
    samplesPerSecond: SAMPLES / accelerated,
    nsPerSample: (accelerated * 1e9) / SAMPLES,
    passes: PASSES,
    extra: { coreNsPerSample: (core * 1e9) / SAMPLES, acceleratedOverCore: accelerated / core },
  });
  return results;
}
