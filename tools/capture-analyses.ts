// The analyses of a capture run beside the pipeline: periodic error before and after the correction, the radius
// residual, calibration_stale, the source power, and the decimated series and figures the report draws. They read
// what the pipeline wrote for each block and never change it, so they can run on another thread
// (capture-analysis-thread.ts) while the pipeline goes on with the next blocks: the same code, the same results.

// Imported module by module, not through the library's index: the worker thread loads this file first, and the
// whole library would double its start-up, during which the pipeline's side waits.
import { AlarmBit } from '../src/core/alarms.js';
import { createPeriodicErrorAnalyzer, createPhaseDomainEstimator, type PeriodicErrorSummary, type PhaseDomainEstimator } from '../src/core/periodic-error.js';
import { createResidualAnalyzer, type RadiusOverTime, type ResidualSummary } from '../src/core/fit/residual.js';
import { createModelWatch, type ModelWatchEvent, type ModelWatchOptions } from '../src/core/fit/model-watch.js';
import { createHarmonicEstimator, type HarmonicEstimate } from '../src/core/fit/harmonics.js';
import { createCorrection } from '../src/core/correction.js';
import { fastAtan2, wrapPhase } from '../src/core/phase.js';
import type { ChannelParameters, EllipseCalibration } from '../src/core/index.js';
import { createWasmFrontEnd, type WasmFrontEnd } from '../src/accel/front-end.js';
import { createAxisKernels, type BlockExtremes, type SharedBlockSummary } from '../src/accel/axis-kernels.js';
import { createModelWatchChunkSums, createPeriodicErrorBinning, createPhaseDomainSums, createResidualRun } from '../src/accel/analysis-kernels.js';

/** Samples per block read from a capture (the analyses' schedule counts these blocks). */
export const CAPTURE_BLOCK_SAMPLES = 4096;
/**
 * Read buffer (bytes) for the parts of a capture read one by one (the fit's spread windows, calibrate's analysed
 * blocks): a few blocks of int16 pairs, where the default 256 KiB buffers, two a part, only made garbage.
 */
export const PART_READ_BYTES = 1 << 16;
/** Most calibration_stale events kept. */
export const MAX_SPANS = 1000;

/** A decimated time series: min and max of each bucket, with the bucket doubling when the store is full. */
export interface Envelope {
  readonly t: Float64Array;
  readonly min: Float64Array;
  readonly max: Float64Array;
}

/**
 * The bucket stride a run of `totalSamples` ends with: the least power of two under which the buckets number fewer
 * than `maxPoints` (an even number; with an odd one halving drops a bucket, so the run starts at 1 and doubles).
 */
export function finalStride(maxPoints: number, totalSamples: number | null): number {
  if (totalSamples === null || maxPoints % 2 !== 0) return 1;
  let stride = 1;
  while (totalSamples >= maxPoints * stride) stride *= 2;
  return stride;
}

// Both collectors keep their points in typed arrays of fixed size: plain arrays that change element kind and
// length deoptimise the per-block loops, which then box every double.
/**
 * With the run's length known (`totalSamples`), the buckets start at the stride they would end with: the same
 * series as doubling from 1 (halving pairs the buckets aligned from the first sample), but no block of a long run
 * then spans two buckets, so every block can come as its extremes.
 */
export function createEnvelope(maxPoints: number, totalSamples: number | null = null) {
  const t = new Float64Array(maxPoints);
  const min = new Float64Array(maxPoints);
  const max = new Float64Array(maxPoints);
  const bucket = new Float64Array([0, Infinity, -Infinity, 0]); // samples in it, min, max, time of its first sample
  let stride = finalStride(maxPoints, totalSamples);
  let count = 0;
  function halve(): void {
    const half = count >> 1;
    for (let k = 0; k < half; k++) {
      t[k] = t[2 * k]!;
      min[k] = Math.min(min[2 * k]!, min[2 * k + 1]!);
      max[k] = Math.max(max[2 * k]!, max[2 * k + 1]!);
    }
    count = half;
    stride *= 2;
  }
  function close(start: number, low: number, high: number): void {
    t[count] = start;
    min[count] = low;
    max[count] = high;
    count++;
    if (count === maxPoints) halve();
  }
  return {
    series(): Envelope {
      return { t: t.slice(0, count), min: min.slice(0, count), max: max.slice(0, count) };
    },
    /**
     * Adds a block of values at times t (s) or, without t, at (firstIndex + i) · secondsPerSample. `least` and
     * `most`, when given, are the block's extremes as `if (value < least) least = value` from Infinity finds them
     * (NaN for none): a block that falls in one bucket then needs no pass of its own.
     */
    add(values: Float64Array | Float32Array, n: number, times: Float64Array | null, firstIndex: number, secondsPerSample: number, least = NaN, most = NaN): void {
      let inBucket = bucket[0]!, low = bucket[1]!, high = bucket[2]!, start = bucket[3]!;
      let i = 0;
      if (least === least && most === most && stride - inBucket >= n) {
        // A block within the bucket: what the loop below does, from the extremes.
        if (inBucket === 0) start = times === null ? firstIndex * secondsPerSample : times[0]!;
        if (least < low) low = least;
        if (most > high) high = most;
        inBucket += n;
        i = n;
        if (inBucket >= stride) {
          close(start, low, high);
          inBucket = 0;
          low = Infinity;
          high = -Infinity;
        }
      }
      while (i < n) {
        if (inBucket === 0) start = times === null ? (firstIndex + i) * secondsPerSample : times[i]!;
        // The rest of the bucket, or of the block, in a loop that only compares.
        const end = Math.min(n, i + stride - inBucket);
        inBucket += end - i;
        for (; i < end; i++) {
          const value = values[i]!;
          if (value < low) low = value;
          if (value > high) high = value;
        }
        if (inBucket >= stride) {
          close(start, low, high);
          inBucket = 0;
          low = Infinity;
          high = -Infinity;
        }
      }
      bucket[0] = inBucket;
      bucket[1] = low;
      bucket[2] = high;
      bucket[3] = start;
    },
  };
}

/**
 * Every stride-th sample for the Lissajous figures, raw and corrected, the stride doubling when the store is
 * full, so points spread over the whole capture. Only the kept samples are corrected: by the calibration, or for
 * three or four outputs as the combined pair level·(cos φ, sin φ) from the channel pipeline's output.
 */
export function createFigureSampler(maxPoints: number, calibration: EllipseCalibration) {
  const rawX = new Float64Array(maxPoints);
  const rawY = new Float64Array(maxPoints);
  const corrU = new Float64Array(maxPoints);
  const corrV = new Float64Array(maxPoints);
  const { offsetX, offsetY, amplitudeX, amplitudeY, phaseErrorRad } = calibration;
  const sinE = Math.sin(phaseErrorRad);
  const cosE = Math.cos(phaseErrorRad);
  let count = 0;
  let stride = 1;
  let skip = 0; // samples still to pass before the next kept one
  const slice = (array: Float64Array) => array.slice(0, count);
  return {
    raw: () => ({ x: slice(rawX), y: slice(rawY) }),
    corrected: () => ({ x: slice(corrU), y: slice(corrV) }),
    add(xs: ArrayLike<number>, ys: ArrayLike<number>, n: number, combined: { level: Float32Array; unwrappedPhaseRad: Float64Array } | null): void {
      let i = skip;
      for (; i < n; i += stride) {
        const x = xs[i]!;
        const y = ys[i]!;
        // Non-finite samples are drawn at the centre: the figure shows them and its scales survive.
        const finite = x - x === 0 && y - y === 0;
        if (combined === null) {
          const cu = finite ? (x - offsetX) / amplitudeX : 0;
          corrU[count] = cu;
          corrV[count] = finite ? ((y - offsetY) / amplitudeY - cu * sinE) / cosE : 0;
        } else {
          const level = combined.level[i]!;
          const phase = combined.unwrappedPhaseRad[i]!;
          corrU[count] = level === level ? level * Math.cos(phase) : 0;
          corrV[count] = level === level ? level * Math.sin(phase) : 0;
        }
        rawX[count] = finite ? x : offsetX;
        rawY[count] = finite ? y : offsetY;
        if (++count === maxPoints) {
          const half = count >> 1;
          for (let k = 0; k < half; k++) {
            rawX[k] = rawX[2 * k]!;
            rawY[k] = rawY[2 * k]!;
            corrU[k] = corrU[2 * k]!;
            corrV[k] = corrV[2 * k]!;
          }
          count = half;
          stride *= 2;
          i += stride - (stride >> 1); // the next kept sample is a whole new stride after this one
        }
      }
      skip = i - n;
    },
  };
}

/** The reason, in the user's units, when no window of the phase-domain method could be used. */
function afterNotMeasured(after: PhaseDomainEstimator, metresPerRad: number): string | null {
  const { fitted, used, smallestMisfitRad } = after.windows;
  if (used > 0) return null;
  const { windowSpanRad, maxWindowSamples, maxMisfitRad } = after.options;
  const windows = `${windowSpanRad / (2 * Math.PI)} fringes of phase or ${maxWindowSamples} samples`;
  if (fitted === 0) return `not measured: no stretch of clean signal spans ${windows} to measure it`;
  const nmOf = (rad: number) => (rad * metresPerRad * 1e9).toFixed(2);
  return (
    `not measurable on this motion: in every one of the ${fitted} clean windows (${windows} each) the motion departs ` +
    `from a cubic in time by at least ${smallestMisfitRad.toFixed(4)} rad (${nmOf(smallestMisfitRad)} nm) RMS beyond the ` +
    `noise, more than the ${maxMisfitRad} rad (${nmOf(maxMisfitRad)} nm) the method allows: motion this irregular cannot be ` +
    `told from a periodic error. Record a smooth move over a few fringes to measure it; the radius analysis indicates its size`
  );
}

/** Samples whose signal itself is in doubt stay out of the periodic-error analysis. */
const SIGNAL_TROUBLE = AlarmBit.lowSignal | AlarmBit.saturation | AlarmBit.badSample | AlarmBit.inputGap;

/**
 * The uncorrected phase fastAtan2(y − mid, x − mid) of a block, by the exact WebAssembly kernel with the identity
 * correction u = 1·x − mid, v = (0·x + 1·y) − mid: the same doubles (but +0 for a y of −0, which changes at most
 * the sign of an exact zero), so the same phases; null when it declines the block (a non-finite sample, or
 * x = y = mid, where fastAtan2's 0/0 rule applies) or is missing.
 */
function rawPhases(kernel: WasmFrontEnd | null, xs: Float64Array, ys: Float64Array, n: number, mid: number, level: Float32Array, identity: Float64Array): Float64Array | null {
  if (kernel === null) return null;
  identity[1] = -mid;
  identity[4] = -mid;
  return kernel.process(xs, ys, n, identity, -Infinity, Infinity, Number.MIN_VALUE, level, 0, 0);
}

/** Which samples are trustworthy: the signal itself is not in doubt. */
function validOf(flags: Uint8Array, n: number, valid: Uint8Array): void {
  const trouble = SIGNAL_TROUBLE;
  for (let i = 0; i < n; i++) valid[i] = (flags[i]! & trouble) === 0 ? 1 : 0;
}

/**
 * The uncorrected phase's error against the corrected one (from `raw`, the uncorrected phases, when given). A plain
 * function, so V8 optimises its loop (it would not inside the async replay loop).
 */
function beforeError(xs: Float64Array, ys: Float64Array, n: number, raw: Float64Array | null, unwrappedPhaseRad: Float64Array, error: Float64Array, mid: number): void {
  if (raw !== null) for (let i = 0; i < n; i++) error[i] = wrapPhase(raw[i]! - unwrappedPhaseRad[i]!);
  else for (let i = 0; i < n; i++) error[i] = wrapPhase(fastAtan2(ys[i]! - mid, xs[i]! - mid) - unwrappedPhaseRad[i]!);
}

interface PowerState {
  min: number;
  max: number;
  sum: number;
  count: number;
}

/** Three or four outputs: the power's range and mean. */
function powerFigures(output: { power: Float32Array }, n: number, state: PowerState): void {
  for (let i = 0; i < n; i++) {
    const p = output.power[i]!;
    if (p === p) {
      if (p < state.min) state.min = p;
      if (p > state.max) state.max = p;
      state.sum += p;
      state.count++;
    }
  }
}

/**
 * Three or four outputs: the power-normalised pair the chain tracked, level·(cos φ, sin φ), back from its radius and
 * phase, for the radius analyses (the level is that pair's radius, see createChannelPipeline).
 */
function normalisedPair(level: Float32Array, phaseRad: Float64Array, n: number, u: Float64Array, v: Float64Array): void {
  for (let i = 0; i < n; i++) {
    const r = level[i]!;
    u[i] = r * Math.cos(phaseRad[i]!);
    v[i] = r * Math.sin(phaseRad[i]!);
  }
}

export interface PeriodicErrorResult {
  readonly summary: PeriodicErrorSummary;
  /** Mean error per phase bin, metres. */
  readonly binnedM: Float64Array;
}

/** What the analyses need to know of the run, fixed before its first block (plain data: it crosses to a thread). */
export interface AnalysisConfig {
  readonly calibration: EllipseCalibration;
  /** Layout of 3 or 4 outputs, else null. */
  readonly layout: readonly ChannelParameters[] | null;
  /** The ADC's mid-scale, the zero of the uncorrected phase. */
  readonly mid: number;
  readonly rateHz: number;
  readonly metresPerRad: number;
  readonly maxPlotPoints: number;
  /** Samples of the run when known beforehand (a WAV file's length), else null. */
  readonly totalSamples: number | null;
  readonly modelWatch?: ModelWatchOptions;
  readonly estimateHarmonics?: { readonly orders: number; readonly totalSamples: number };
  /** Which analyses this instance runs (see AnalysisName); default all of them. */
  readonly analyses?: readonly AnalysisName[];
}

/**
 * The analyses, which two threads may share, each instance over the same blocks: 'before' the periodic error of the
 * uncorrected signals, 'after' its phase-domain estimate (and `afterNotMeasured`), 'residual' the radius residual,
 * 'series' what only a whole run needs (the source power, the harmonics' estimate, calibration_stale and the
 * report's series). An instance's results for the analyses it does not run are those of no samples; `joinAnalyses`
 * puts two instances' results together, the same as one instance of them all gives.
 */
export type AnalysisName = 'before' | 'after' | 'residual' | 'series';

export const ANALYSIS_NAMES: readonly AnalysisName[] = ['before', 'after', 'residual', 'series'];

/** The results of the instance that ran `ran` joined with those of one that ran the others, over the same blocks. */
export function joinAnalyses(mine: AnalysisResults, ran: readonly AnalysisName[], others: AnalysisResults): AnalysisResults {
  const from = (name: AnalysisName) => (ran.includes(name) ? mine : others);
  const { power, harmonicEstimate, modelWatch, report } = from('series');
  const { after, afterNotMeasured } = from('after');
  return { power, before: from('before').before, after, afterNotMeasured, harmonicEstimate, modelWatch, residual: from('residual').residual, report };
}

/** The pipeline's output of one block, as the analyses read it. */
export interface BlockOutput {
  readonly positionM: Float64Array;
  readonly velocityMS: Float64Array;
  readonly level: Float32Array;
  readonly flags: Uint8Array;
  /**
   * Written for analysed blocks, and for every block with three or four outputs, a harmonic correction or the
   * harmonics' estimate (runCapture); else left as it was.
   */
  readonly unwrappedPhaseRad: Float64Array;
  readonly power: Float32Array;
}

/** One block of the run: the capture's samples and the pipeline's output for them. */
export interface AnalysedBlock {
  readonly firstIndex: number;
  readonly length: number;
  /** Times from the capture (s), else null (sample index / rate). */
  readonly t: Float64Array | null;
  /**
   * Whether the periodic-error and radius analyses take this block (the run's createAnalysisSchedule); only then
   * are the capture's samples x, y needed, else null.
   */
  readonly analysed: boolean;
  readonly x: Float64Array | null;
  readonly y: Float64Array | null;
  readonly output: BlockOutput;
  /** Three or four outputs with a harmonic correction: the phase before it (the pair as the chain saw it), else null. */
  readonly phaseBeforeHarmonics: Float64Array | null;
}

export interface AnalysisResults {
  /** Three or four outputs: the source power's range and mean over the capture (1 = the calibration capture's mean). */
  readonly power: { readonly min: number; readonly max: number; readonly mean: number } | null;
  readonly before: PeriodicErrorResult;
  readonly after: PeriodicErrorResult;
  readonly afterNotMeasured: string | null;
  readonly harmonicEstimate: HarmonicEstimate | null;
  readonly modelWatch: { readonly events: readonly ModelWatchEvent[]; readonly raised: number; readonly activeAtEnd: boolean; readonly options: ReturnType<typeof createModelWatch>['options'] };
  readonly residual: {
    readonly summary: ResidualSummary;
    /** Mean radius − 1 per phase bin (relative), bins over [−π, π). */
    readonly byPhase: Float64Array;
    readonly overTime: RadiusOverTime;
  };
  readonly report: {
    readonly position: Envelope;
    readonly velocity: Envelope;
    /** Three or four outputs: the source power (1 = the calibration capture's mean), else null. */
    readonly power: Envelope | null;
  };
}

/** Output arrays for one block of CAPTURE_BLOCK_SAMPLES. */
export function createBlockOutput(buffer?: SharedArrayBuffer, offset = 0): BlockOutput {
  const n = CAPTURE_BLOCK_SAMPLES;
  if (buffer === undefined) {
    return { positionM: new Float64Array(n), velocityMS: new Float64Array(n), level: new Float32Array(n), flags: new Uint8Array(n), unwrappedPhaseRad: new Float64Array(n), power: new Float32Array(n) };
  }
  return {
    positionM: new Float64Array(buffer, offset, n),
    velocityMS: new Float64Array(buffer, offset + 8 * n, n),
    unwrappedPhaseRad: new Float64Array(buffer, offset + 16 * n, n),
    level: new Float32Array(buffer, offset + 24 * n, n),
    power: new Float32Array(buffer, offset + 28 * n, n),
    flags: new Uint8Array(buffer, offset + 32 * n, n),
  };
}

/** Bytes of one block's output in a shared buffer (a multiple of 8). */
export const BLOCK_OUTPUT_BYTES = 33 * CAPTURE_BLOCK_SAMPLES;

export interface CaptureAnalyses {
  add(block: AnalysedBlock): void;
  /**
   * Lets `length` samples pass, as a block left out of the periodic-error and radius analyses, without the
   * pipeline's output: only those analyses' results are then meant (see analyseCapture).
   */
  skip(length: number): void;
  finish(): AnalysisResults;
}

/**
 * `inPlace`: a block summary over the shared memory the blocks' outputs lie in (the worker's ring), which then
 * needs no copies; blocks elsewhere are copied into the analyses' own kernel memory.
 */
export function createCaptureAnalyses(config: AnalysisConfig, inPlace: SharedBlockSummary | null = null): CaptureAnalyses {
  const { calibration, mid, rateHz, metresPerRad } = config;
  const layout = config.layout;
  const combined = layout !== null;
  const power: PowerState = { min: Infinity, max: -Infinity, sum: 0, count: 0 };
  const errorBefore = new Float64Array(CAPTURE_BLOCK_SAMPLES);
  const valid = new Uint8Array(CAPTURE_BLOCK_SAMPLES);
  const runs = new Set(config.analyses ?? ANALYSIS_NAMES);
  const runsBefore = runs.has('before'), runsAfter = runs.has('after'), runsResidual = runs.has('residual'), runsSeries = runs.has('series');
  // The per-sample work of the periodic-error bins, the phase-domain windows, the radius residual and the model
  // watch's chunks in WebAssembly (SIMD) where it exists (src/accel/analysis-kernels.ts): the same results as the
  // core's loops, to the bit. Only the analyses this instance runs get their kernels (the others stay empty).
  const binning = runsBefore ? createPeriodicErrorBinning() : null;
  const before = createPeriodicErrorAnalyzer(binning === null ? {} : { binning });
  const windowSums = runsAfter ? createPhaseDomainSums() : null;
  const after = createPhaseDomainEstimator(windowSums === null ? {} : { sums: windowSums });
  const residualRun = runsResidual ? createResidualRun() : null;
  const residual = createResidualAnalyzer(residualRun === null ? {} : { run: residualRun });
  const correction = createCorrection({ calibration });
  const correctedU = new Float64Array(CAPTURE_BLOCK_SAMPLES);
  const correctedV = new Float64Array(CAPTURE_BLOCK_SAMPLES);
  const estimator = config.estimateHarmonics === undefined ? null : createHarmonicEstimator(config.estimateHarmonics);
  const chunkSums = runsSeries ? createModelWatchChunkSums() : null;
  const watch = createModelWatch(chunkSums === null ? config.modelWatch : { ...config.modelWatch, chunkSums });
  const watchEvents: ModelWatchEvent[] = [];
  let watchRaised = 0;
  const position = createEnvelope(config.maxPlotPoints, config.totalSamples);
  const velocity = createEnvelope(config.maxPlotPoints, config.totalSamples);
  const powerSeries = createEnvelope(config.maxPlotPoints, config.totalSamples);
  const rawKernel = runsBefore ? createWasmFrontEnd({ precision: 'f64-exact' }) : null;
  const rawLevel = new Float32Array(CAPTURE_BLOCK_SAMPLES);
  const identity = Float64Array.of(1, 0, 0, 1, 0);
  const summaries = runsSeries ? createAxisKernels([2], CAPTURE_BLOCK_SAMPLES) : null;
  const extremes: BlockExtremes = { positionMinM: NaN, positionMaxM: NaN, velocityMinMS: NaN, velocityMaxMS: NaN, levelMin: NaN, flagsSeen: 0 };
  const secondsPerSample = 1 / rateHz;

  /** A block left out of the periodic-error and radius analyses: they count its samples in time only. */
  function skip(length: number): void {
    if (runsAfter) after.skip(length);
    if (runsResidual) residual.skip(length);
  }

  return {
    add(block) {
      const { x, y, output, firstIndex, length: n, analysed } = block;
      // The radius analysis runs on the corrected pair: two outputs through the ellipse correction, three or four
      // power-normalised, taken before the harmonic correction moves the phase (the pair as the chain saw it).
      if (analysed && runsResidual) {
        if (!combined) correction.process(x!, y!, correctedU, correctedV, n);
        else normalisedPair(output.level, block.phaseBeforeHarmonics ?? output.unwrappedPhaseRad, n, correctedU, correctedV);
      }
      let allValid = false;
      if (runsSeries) {
        // The block's extremes and flags in one pass (WebAssembly SIMD where it exists), in place or over copies.
        if (inPlace !== null && inPlace.holds(output)) inPlace.summarise(output, n, extremes);
        else {
          const region = summaries!.regions[0]!;
          region.positionM.set(output.positionM.subarray(0, n));
          region.velocityMS.set(output.velocityMS.subarray(0, n));
          region.level.set(output.level.subarray(0, n));
          region.flags.set(output.flags.subarray(0, n));
          summaries!.summarise(0, n, extremes);
        }
        allValid = (extremes.flagsSeen & SIGNAL_TROUBLE) === 0;
        if (allValid) valid.fill(1, 0, n);
        else validOf(output.flags, n, valid);
        if (combined) {
          powerFigures(output, n, power);
          powerSeries.add(output.power, n, block.t, firstIndex, secondsPerSample);
        }
        position.add(output.positionM, n, block.t, firstIndex, secondsPerSample, extremes.positionMinM, extremes.positionMaxM);
        velocity.add(output.velocityMS, n, block.t, firstIndex, secondsPerSample, extremes.velocityMinMS, extremes.velocityMaxMS);
        estimator?.add(output.unwrappedPhaseRad, n, valid);
      } else if (analysed) validOf(output.flags, n, valid);
      if (analysed) {
        if (runsBefore) {
          const raw = rawPhases(rawKernel, x!, y!, n, mid, rawLevel, identity);
          beforeError(x!, y!, n, raw, output.unwrappedPhaseRad, errorBefore, mid);
          before.add(output.unwrappedPhaseRad, errorBefore, n, valid);
        }
        if (runsAfter) after.process(output.unwrappedPhaseRad, valid, n);
        if (runsResidual) residual.add(correctedU, correctedV, n, valid);
      } else skip(n);
      if (runsSeries) {
        const already = watchEvents.length;
        // On the chain's level (the corrected radius; for 3-4 outputs the power-normalised one), as the live chain.
        // Without a mask when every sample is valid: the same, and the watch's loop is then twice as fast.
        watch.processRadius(output.level, n, firstIndex, watchEvents, allValid ? undefined : valid);
        for (let k = already; k < watchEvents.length; k++) if (watchEvents[k]!.state === 'raised') watchRaised++;
        if (watchEvents.length > MAX_SPANS) watchEvents.length = MAX_SPANS;
      }
    },
    skip,
    finish() {
      const toMetres = (analyzer: { summary(): PeriodicErrorSummary; binnedMeanRad(): Float64Array }): PeriodicErrorResult => ({
        summary: analyzer.summary(),
        binnedM: analyzer.binnedMeanRad().map((rad) => rad * metresPerRad),
      });
      return {
        power: combined ? { min: power.min, max: power.max, mean: power.sum / power.count } : null,
        before: toMetres(before),
        after: toMetres(after),
        afterNotMeasured: afterNotMeasured(after, metresPerRad),
        harmonicEstimate: estimator === null ? null : estimator.solve(),
        modelWatch: { events: watchEvents, raised: watchRaised, activeAtEnd: watch.active, options: watch.options },
        residual: { summary: residual.summary(), byPhase: residual.radiusByPhase(), overTime: residual.radiusOverTime() },
        report: {
          position: position.series(),
          velocity: velocity.series(),
          power: combined ? powerSeries.series() : null,
        },
      };
    },
  };
}
