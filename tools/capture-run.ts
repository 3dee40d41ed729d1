// Shared passes over a capture file for calibrate and replay: the ellipse fit, and the pipeline run with its
// periodic-error analysis and the decimated series the report draws. Constant memory for any file length.

import {
  AlarmBit,
  createChannelPipeline,
  createDetectorFit,
  createPeriodicErrorAnalyzer,
  createResidualAnalyzer,
  createModelWatch,
  createHarmonicCorrection,
  createHarmonicEstimator,
  createCorrection,
  createPhaseDomainEstimator,
  createAnalysisSchedule,
  fastAtan2,
  wrapPhase,
  adcMidScale,
  type AdcFormat,
  type AlarmEvent,
  type AlarmKind,
  type ChannelParameters,
  type EllipseCalibration,
  type EllipseFitMethodOptions,
  type EllipseFitResult,
  type PeriodicErrorSummary,
  type PhaseDomainEstimator,
  type RadiusOverTime,
  type ModelWatchEvent,
  type HarmonicEstimate,
  type PhaseHarmonics,
  type ModelWatchOptions,
  type ResidualSummary,
  type SpeedLimits,
  type UnwrapMethod,
} from '../src/core/index.js';
import { createPipeline, createWasmFrontEnd, type WasmFrontEnd } from '../src/accel/index.js';
import { openCapture, type CaptureInfo, type OpenCaptureOptions } from '../src/io/capture/index.js';
import type { ResultWriter } from '../src/io/results/index.js';
import type { Progress } from './progress.js';

/** Samples per block read from a capture (the analyses' schedule counts these blocks). */
export const CAPTURE_BLOCK_SAMPLES = 4096;

/** The core's ADC format for a capture: from the file (header or `adc` metadata), else int16 for int16 WAV, else none stated. */
export function adcOf(info: CaptureInfo): { adc: AdcFormat; stated: boolean } {
  return info.adc === null ? { adc: { kind: 'float', fullScale: Number.MAX_VALUE }, stated: false } : { adc: info.adc, stated: true };
}

/**
 * Fits the ellipse with the library's detector fit (`createDetectorFit`: for 3 or 4 outputs a source-power pass
 * first, then the two-pass gated fit), reading the file once per pass.
 */
export async function fitCapture(
  path: string,
  open: OpenCaptureOptions,
  fitOptions: EllipseFitMethodOptions,
  progress: Progress,
): Promise<{ fit: EllipseFitResult; info: CaptureInfo; totalSamples: number; channels?: readonly ChannelParameters[] }> {
  const fit = createDetectorFit({ ...fitOptions, channelCount: open.channels?.length ?? 2 });
  const labels = [' (source power)', '', ' (refined)'];
  let totalSamples = 0;
  for (;;) {
    const capture = await openCapture(path, { ...open, blockSize: CAPTURE_BLOCK_SAMPLES });
    progress.start(`fit ${path}${labels[fit.pass]}`, capture.info.totalSamples);
    try {
      for await (const block of capture.blocks()) {
        fit.add(fit.channelCount === 2 ? [block.x, block.y] : block.channels, block.length);
        totalSamples = block.firstIndex + block.length;
        progress.update(totalSamples);
      }
    } finally {
      progress.stop();
      await capture.close();
    }
    const pass = fit.pass;
    const result = fit.endPass();
    if (result === null) continue;
    if (!result.ok && pass === 0) {
      // The source-power pass refused the outputs: name them.
      return { fit: { ...result, message: `outputs ${capture.info.channels.join(',')}: ${result.message}` }, info: capture.info, totalSamples };
    }
    const { channels, ...ellipse } = result;
    return { fit: ellipse as EllipseFitResult, info: capture.info, totalSamples, ...(channels === undefined ? {} : { channels }) };
  }
}

export interface MeasureSettings {
  readonly wavelengthM: number;
  readonly fold: number;
  readonly refractiveIndex: number;
  readonly bandwidthHz?: number;
  readonly unwrap?: UnwrapMethod;
  /** Factor applied to positions and velocities, e.g. the normalisation to 20 °C; default 1. */
  readonly lengthScale?: number;
}

/** A decimated time series: min and max of each bucket, with the bucket doubling when the store is full. */
export interface Envelope {
  readonly t: Float64Array;
  readonly min: Float64Array;
  readonly max: Float64Array;
}

// Both collectors keep their points in typed arrays of fixed size: plain arrays that change element kind and
// length deoptimise the per-block loops, which then box every double.
function createEnvelope(maxPoints: number) {
  const t = new Float64Array(maxPoints);
  const min = new Float64Array(maxPoints);
  const max = new Float64Array(maxPoints);
  const bucket = new Float64Array([0, Infinity, -Infinity, 0]); // samples in it, min, max, time of its first sample
  let stride = 1;
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
  return {
    series(): Envelope {
      return { t: t.slice(0, count), min: min.slice(0, count), max: max.slice(0, count) };
    },
    /** Adds a block of values at times t (s) or, without t, at (firstIndex + i) · secondsPerSample. */
    add(values: Float64Array | Float32Array, n: number, times: Float64Array | null, firstIndex: number, secondsPerSample: number): void {
      let inBucket = bucket[0]!, low = bucket[1]!, high = bucket[2]!, start = bucket[3]!;
      let i = 0;
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
          t[count] = start;
          min[count] = low;
          max[count] = high;
          count++;
          inBucket = 0;
          low = Infinity;
          high = -Infinity;
          if (count === maxPoints) halve();
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
function createFigureSampler(maxPoints: number, calibration: EllipseCalibration) {
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
    add(xs: Float64Array, ys: Float64Array, n: number, combined: { level: Float32Array; unwrappedPhaseRad: Float64Array } | null): void {
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

export interface AlarmSpan {
  readonly kind: AlarmKind;
  readonly startS: number;
  /** NaN while still active at the end of the capture. */
  readonly endS: number;
}

/**
 * Whether the raw outputs' zero lies outside their figure, so the phase about it is no fringe phase: two outputs by the
 * ellipse, three or four by each output's own offset and amplitude (their pair is power-normalised, centred on zero).
 */
function unipolar(layout: readonly ChannelParameters[] | undefined, calibration: EllipseCalibration, mid: number): boolean {
  if (layout !== undefined) return layout.some((c) => Math.abs(c.offset - mid) > c.amplitude);
  return Math.abs(calibration.offsetX - mid) > calibration.amplitudeX || Math.abs(calibration.offsetY - mid) > calibration.amplitudeY;
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

export interface PeriodicErrorResult {
  readonly summary: PeriodicErrorSummary;
  /** Mean error per phase bin, metres. */
  readonly binnedM: Float64Array;
}

export interface RunResult {
  readonly info: CaptureInfo;
  readonly samples: number;
  readonly metresPerRad: number;
  readonly speedLimits: SpeedLimits;
  readonly finalPositionM: number;
  readonly countLostAtEnd: boolean;
  /** Whether the ADC format (and so saturation detection) came from the capture or the caller. */
  readonly adcStated: boolean;
  readonly alarmCounts: Readonly<Record<AlarmKind, number>>;
  readonly alarmSpans: readonly AlarmSpan[];
  /** Three or four outputs: the source power's range and mean over the capture (1 = the calibration capture's mean). */
  readonly power: { readonly min: number; readonly max: number; readonly mean: number } | null;
  /** The error of the uncorrected phase (ADC mid-scale removed only) against the corrected phase. */
  readonly before: PeriodicErrorResult;
  /** Why "before" means nothing for this capture (unipolar signals), else null. */
  readonly beforeNotApplicable: string | null;
  /** The corrected phase's periodic error, in the phase domain (see createPhaseDomainEstimator): any motion a cubic follows over two fringes. */
  readonly after: PeriodicErrorResult;
  /** Why "after" could not be measured on this capture (with how far the motion was from what the method needs), else null. */
  readonly afterNotMeasured: string | null;
  /** The periodic-error and radius analyses looked at every `analysedEvery`-th block of 4096 samples (1: all of them; see createAnalysisSchedule). */
  readonly analysedEvery: number;
  /** Where the signal left the calibration's model (`calibration_stale`, see createModelWatch): the first events, and how often it was raised. */
  /** The harmonic estimate asked for by `estimateHarmonics`, else null. */
  readonly harmonicEstimate: HarmonicEstimate | null;
  readonly modelWatch: { readonly events: readonly ModelWatchEvent[]; readonly raised: number; readonly activeAtEnd: boolean; readonly options: ReturnType<typeof createModelWatch>['options'] };
  /** What the ellipse misses: the corrected radius against phase and time (see createResidualAnalyzer). */
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
    readonly raw: { x: Float64Array; y: Float64Array };
    readonly corrected: { x: Float64Array; y: Float64Array };
  };
}

export interface RunOptions {
  readonly open: OpenCaptureOptions;
  readonly calibration: EllipseCalibration;
  /** Layout of 3 or 4 outputs (the capture opened with as many `channels`); `calibration` then serves the figures only. */
  readonly channels?: readonly ChannelParameters[];
  readonly settings: MeasureSettings;
  /** ADC format for saturation; default from the capture (see `adcOf`). */
  readonly adc?: AdcFormat;
  readonly writer?: ResultWriter;
  readonly progress: Progress;
  /** Upper bound of points kept per plotted series. */
  readonly maxPlotPoints?: number;
  /** Bounds of the calibration_stale alarm (see createModelWatch). */
  readonly modelWatch?: ModelWatchOptions;
  /** Harmonic correction applied to every block's phase and position after the pipeline (see createHarmonicCorrection). */
  readonly harmonics?: PhaseHarmonics;
  /** Estimate the phase harmonics of this run (calibrate --harmonics N): orders and the capture's sample count. */
  readonly estimateHarmonics?: { readonly orders: number; readonly totalSamples: number };
  /**
   * Refractive index of air at a time from the first sample (s), for an environment that changes during the run:
   * set once per block, at the block's middle. It rescales the reading, never the fringe count.
   */
  readonly refractiveIndexAt?: (tS: number) => number;
  /** Samples the periodic-error and radius analyses look at before they take every n-th block (createAnalysisSchedule); default 2^20. */
  readonly analysisBudgetSamples?: number;
}

const MAX_SPANS = 1000;
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

/** Runs the whole pipeline over a capture, writing rows to the writer if one is given. */
export async function runCapture(path: string, options: RunOptions): Promise<RunResult> {
  const { calibration, settings, writer, progress } = options;
  const capture = await openCapture(path, { ...options.open, blockSize: CAPTURE_BLOCK_SAMPLES });
  const info = capture.info;
  const fromFile = adcOf(info);
  const adc = options.adc ?? fromFile.adc;
  const adcStated = options.adc !== undefined || fromFile.stated;
  const chain = {
    rateHz: info.rateHz,
    wavelengthM: settings.wavelengthM,
    fold: settings.fold,
    refractiveIndex: settings.refractiveIndex,
    bandwidthHz: settings.bandwidthHz,
    unwrap: settings.unwrap,
    lengthScale: settings.lengthScale,
    adc,
  };
  const layout = options.channels;
  if (layout !== undefined && layout.length !== info.channels.length) {
    throw new Error(`${path}: the calibration has ${layout.length} detector outputs, the capture was opened with ${info.channels.length} (${info.channels.join(',')})`);
  }
  const pipeline = createPipeline({ ...chain, calibration });
  const combined = layout === undefined ? null : createChannelPipeline({ ...chain, channels: layout });
  const output = {
    positionM: new Float64Array(CAPTURE_BLOCK_SAMPLES),
    velocityMS: new Float64Array(CAPTURE_BLOCK_SAMPLES),
    level: new Float32Array(CAPTURE_BLOCK_SAMPLES),
    flags: new Uint8Array(CAPTURE_BLOCK_SAMPLES),
    unwrappedPhaseRad: new Float64Array(CAPTURE_BLOCK_SAMPLES),
    power: new Float32Array(CAPTURE_BLOCK_SAMPLES),
  };
  const power: PowerState = { min: Infinity, max: -Infinity, sum: 0, count: 0 };
  const errorBefore = new Float64Array(CAPTURE_BLOCK_SAMPLES);
  const valid = new Uint8Array(CAPTURE_BLOCK_SAMPLES);
  const before = createPeriodicErrorAnalyzer();
  const after = createPhaseDomainEstimator();
  const residual = createResidualAnalyzer();
  const correction = createCorrection({ calibration });
  const correctedU = new Float64Array(CAPTURE_BLOCK_SAMPLES);
  const correctedV = new Float64Array(CAPTURE_BLOCK_SAMPLES);
  const harmonicCorrection = options.harmonics === undefined ? null : createHarmonicCorrection(options.harmonics);
  const estimator = options.estimateHarmonics === undefined ? null : createHarmonicEstimator(options.estimateHarmonics);
  const watch = createModelWatch(options.modelWatch);
  const watchEvents: ModelWatchEvent[] = [];
  let watchRaised = 0;
  const maxPoints = options.maxPlotPoints ?? 2000;
  const position = createEnvelope(maxPoints);
  const velocity = createEnvelope(maxPoints);
  const powerSeries = createEnvelope(maxPoints);
  const figure = createFigureSampler(maxPoints, calibration);
  const events: AlarmEvent[] = [];
  const alarmCounts: Record<AlarmKind, number> = { lowSignal: 0, saturation: 0, badSample: 0, overspeed: 0, inputGap: 0, countLost: 0, lowPower: 0 };
  const spans: AlarmSpan[] = [];
  const open = new Map<AlarmKind, number>();
  const mid = adcMidScale(adc);
  const rawKernel = createWasmFrontEnd({ precision: 'f64-exact' });
  const rawLevel = new Float32Array(CAPTURE_BLOCK_SAMPLES);
  const identity = Float64Array.of(1, 0, 0, 1, 0);
  const schedule = createAnalysisSchedule({ blockSamples: CAPTURE_BLOCK_SAMPLES, totalSamples: info.totalSamples, budgetSamples: options.analysisBudgetSamples });
  let blockIndex = 0;
  const secondsPerSample = 1 / info.rateHz;
  const metresPerRad = pipeline.stages.displacement.metresPerFringe / (2 * Math.PI);
  let samples = 0;
  let finalPositionM = 0;

  progress.start(`replay ${path}`, info.totalSamples);
  try {
    for await (const block of capture.blocks()) {
      const n = block.length;
      events.length = 0;
      if (options.refractiveIndexAt !== undefined) {
        const index = options.refractiveIndexAt((block.firstIndex + n / 2) * secondsPerSample);
        (combined ?? pipeline).setRefractiveIndex(index);
      }
      if (combined === null) pipeline.process(block.x, block.y, n, output, events);
      else combined.process(block.channels, n, output, events);
      const analysed = schedule.take(blockIndex++);
      // The radius analysis runs on the corrected pair: two outputs through the ellipse correction, three or four
      // power-normalised, taken before the harmonic correction moves the phase (the pair as the chain saw it).
      if (analysed) {
        if (combined === null) correction.process(block.x, block.y, correctedU, correctedV, n);
        else normalisedPair(output.level, output.unwrappedPhaseRad, n, correctedU, correctedV);
      }
      harmonicCorrection?.process(output.unwrappedPhaseRad, n, output.positionM, metresPerRad);
      if (writer !== undefined) {
        await writer.write({ firstIndex: block.firstIndex, length: n, t: block.t, rateHz: info.rateHz, ...output });
      }
      for (const event of events) {
        const t = event.sampleIndex / info.rateHz;
        if (event.state === 'raised') {
          alarmCounts[event.kind]++;
          open.set(event.kind, t);
        } else {
          const start = open.get(event.kind);
          open.delete(event.kind);
          if (start !== undefined && spans.length < MAX_SPANS) spans.push({ kind: event.kind, startS: start, endS: t });
        }
      }
      validOf(output.flags, n, valid);
      if (combined !== null) {
        powerFigures(output, n, power);
        powerSeries.add(output.power, n, block.t, block.firstIndex, secondsPerSample);
      }
      position.add(output.positionM, n, block.t, block.firstIndex, secondsPerSample);
      velocity.add(output.velocityMS, n, block.t, block.firstIndex, secondsPerSample);
      figure.add(block.x, block.y, n, combined === null ? null : output);
      estimator?.add(output.unwrappedPhaseRad, n, valid);
      if (analysed) {
        const raw = rawPhases(rawKernel, block.x, block.y, n, mid, rawLevel, identity);
        beforeError(block.x, block.y, n, raw, output.unwrappedPhaseRad, errorBefore, mid);
        before.add(output.unwrappedPhaseRad, errorBefore, n, valid);
        after.process(output.unwrappedPhaseRad, valid, n);
        residual.add(correctedU, correctedV, n, valid);
      } else {
        after.skip(n);
        residual.skip(n);
      }
      const already = watchEvents.length;
      // On the chain's level (the corrected radius; for 3-4 outputs the power-normalised one), as the live chain.
      watch.processRadius(output.level, n, block.firstIndex, watchEvents, valid);
      for (let k = already; k < watchEvents.length; k++) if (watchEvents[k]!.state === 'raised') watchRaised++;
      if (watchEvents.length > MAX_SPANS) watchEvents.length = MAX_SPANS;
      samples += n;
      finalPositionM = output.positionM[n - 1]!;
      progress.update(block.firstIndex + n);
    }
  } finally {
    progress.stop();
    await capture.close();
  }
  for (const [kind, start] of open) if (spans.length < MAX_SPANS) spans.push({ kind, startS: start, endS: Number.NaN });
  const toMetres = (analyzer: { summary(): PeriodicErrorSummary; binnedMeanRad(): Float64Array }): PeriodicErrorResult => ({
    summary: analyzer.summary(),
    binnedM: analyzer.binnedMeanRad().map((rad) => rad * metresPerRad),
  });
  return {
    info,
    samples,
    metresPerRad,
    speedLimits: pipeline.speedLimits,
    finalPositionM,
    countLostAtEnd: (combined ?? pipeline).countLost,
    adcStated,
    alarmCounts,
    alarmSpans: spans,
    power: combined === null ? null : { min: power.min, max: power.max, mean: power.sum / power.count },
    before: toMetres(before),
    beforeNotApplicable: unipolar(layout, calibration, mid)
      ? 'the signals are unipolar (DC-coupled): the zero of the converter lies outside the figure, so the phase about it is not a fringe phase'
      : null,
    after: toMetres(after),
    afterNotMeasured: afterNotMeasured(after, metresPerRad),
    analysedEvery: schedule.every,
    harmonicEstimate: estimator === null ? null : estimator.solve(),
    modelWatch: { events: watchEvents, raised: watchRaised, activeAtEnd: watch.active, options: watch.options },
    residual: { summary: residual.summary(), byPhase: residual.radiusByPhase(), overTime: residual.radiusOverTime() },
    report: {
      position: position.series(),
      velocity: velocity.series(),
      power: combined === null ? null : powerSeries.series(),
      raw: figure.raw(),
      corrected: figure.corrected(),
    },
  };
}
