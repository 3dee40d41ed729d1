// The pipeline's pass over a capture file for calibrate and replay, with its
// analyses (capture-analyses.ts: periodic error, radius residual, the series the report draws), in line or on a
// worker thread. Constant memory for any file length.

import {
  createChannelPipeline,
  createHarmonicCorrection,
  createAnalysisSchedule,
  adcMidScale,
  type AdcFormat,
  type AlarmEvent,
  type AlarmKind,
  type ChannelParameters,
  type EllipseCalibration,
  type PhaseHarmonics,
  type ModelWatchOptions,
  type PipelineOutput,
  type SpeedLimits,
  type UnwrapMethod,
} from '../src/core/index.js';
import { createPipeline } from '../src/accel/index.js';
import { keepCaptureParts, openCapture, openCaptureParts, type CaptureInfo, type KeptParts, type OpenCaptureOptions } from '../src/io/capture/index.js';
import type { ResultWriter } from '../src/io/results/index.js';
import {
  CAPTURE_BLOCK_SAMPLES,
  MAX_SPANS,
  PART_READ_BYTES,
  createBlockOutput,
  createCaptureAnalyses,
  createFigureSampler,
  joinAnalyses,
  type AnalysisConfig,
  type AnalysisName,
  type AnalysisResults,
  type BlockOutput,
} from './capture-analyses.js';
import { analysesInLine, analysisThreadAvailable, createRingMemory, startAnalysisThread, type AnalysisThread } from './capture-analysis-thread.js';
import type { Progress } from './progress.js';

export { CAPTURE_BLOCK_SAMPLES, type Envelope, type PeriodicErrorResult } from './capture-analyses.js';

/** The core's ADC format for a capture: from the file (header or `adc` metadata), else int16 for int16 WAV, else none stated. */
export function adcOf(info: CaptureInfo): { adc: AdcFormat; stated: boolean } {
  return info.adc === null ? { adc: { kind: 'float', fullScale: Number.MAX_VALUE }, stated: false } : { adc: info.adc, stated: true };
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

/** Why "before" means nothing for this capture, else null. */
function beforeNotApplicable(layout: readonly ChannelParameters[] | undefined, calibration: EllipseCalibration, mid: number): string | null {
  return unipolar(layout, calibration, mid)
    ? 'the signals are unipolar (DC-coupled): the zero of the converter lies outside the figure, so the phase about it is not a fringe phase'
    : null;
}

export interface RunResult extends Omit<AnalysisResults, 'report'> {
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
  /** Why "before" means nothing for this capture (unipolar signals), else null. */
  readonly beforeNotApplicable: string | null;
  /** The periodic-error and radius analyses looked at every `analysedEvery`-th block of 4096 samples (1: all of them; see createAnalysisSchedule). */
  readonly analysedEvery: number;
  /** The series and figures the report draws. */
  readonly report: AnalysisResults['report'] & {
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
  /**
   * Run the analyses on a worker thread beside the pipeline (capture-analysis-thread.ts): the same results, about
   * the pipeline's time alone on two cores. Default 'auto': when the machine has two cores or more, the capture
   * holds at least ANALYSIS_THREAD_MIN_SAMPLES (or its length is unknown) and the compiled worker is at hand.
   */
  readonly analysisThread?: boolean | 'auto';
}

/**
 * Read size (bytes) of a run through a whole capture: each read costs the pipeline's thread a round trip to the
 * thread pool, and with 1 MiB instead of the default 256 KiB a replay of 3·10^7 int16 pairs took about 6 % less of
 * that thread's time (two buffers of it: 2 MiB, whatever the capture's length).
 */
export const RUN_READ_BYTES = 1 << 20;

/**
 * Slots of a whole run's ring (createRingMemory): the worker's first blocks run cold, and while it warms up, or
 * starts late on a busy machine, the pipeline ran 64 blocks ahead within a few ms and then waited, 60–130 ms in
 * all in a 3·10^7-sample replay (load 4); with 256, a few ms. Each block takes the slot freed last, so only as many
 * slots as the worker falls behind are ever written: about 10 MB more peak memory, flat with the run's length.
 */
const RUN_RING_SLOTS = 256;

/** Shorter captures are analysed in line: starting a worker costs about as much as analysing them. */
export const ANALYSIS_THREAD_MIN_SAMPLES = 2 ** 22;

/** Whether runCapture runs the analyses on a worker thread (see RunOptions.analysisThread). */
function useAnalysisThread(choice: boolean | 'auto', totalSamples: number | null): boolean {
  if (choice === true) {
    // Only the compiled tools have the worker's script beside them (not sources run through a TypeScript loader).
    if (!import.meta.url.endsWith('.js')) throw new Error('the analysis thread needs the compiled tools (dist/tools)');
    return true;
  }
  return choice === 'auto' && analysisThreadAvailable() && (totalSamples === null || totalSamples >= ANALYSIS_THREAD_MIN_SAMPLES);
}

const phaseless = new WeakMap<BlockOutput, PipelineOutput>();

/** The same output arrays without the unwrapped phase (one record per ring slot). */
function withoutPhase(output: BlockOutput): PipelineOutput {
  let stripped = phaseless.get(output);
  if (stripped === undefined) {
    stripped = { positionM: output.positionM, velocityMS: output.velocityMS, level: output.level, flags: output.flags };
    phaseless.set(output, stripped);
  }
  return stripped;
}

/** Runs the whole pipeline over a capture, writing rows to the writer if one is given. */
/** The chain's options for a capture: its rate and ADC (from the file unless given), the run's settings. */
function chainOf(info: CaptureInfo, options: RunOptions) {
  const { settings } = options;
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
  return { chain, adc, adcStated };
}

export async function runCapture(path: string, options: RunOptions): Promise<RunResult> {
  const { calibration, writer, progress } = options;
  // An int16 capture's blocks as stored: the pipeline takes int16 blocks as they are.
  const capture = await openCapture(path, { readChunkBytes: RUN_READ_BYTES, ...options.open, blockSize: CAPTURE_BLOCK_SAMPLES, int16Blocks: true });
  const info = capture.info;
  const { chain, adc, adcStated } = chainOf(info, options);
  const layout = options.channels;
  if (layout !== undefined && layout.length !== info.channels.length) {
    await capture.close();
    throw new Error(`${path}: the calibration has ${layout.length} detector outputs, the capture was opened with ${info.channels.length} (${info.channels.join(',')})`);
  }
  let threaded: boolean;
  try {
    threaded = useAnalysisThread(options.analysisThread ?? 'auto', info.totalSamples);
  } catch (error) {
    await capture.close();
    throw error;
  }
  // On a worker thread the analyses take the blocks' outputs from a ring in shared memory, which the pipeline's
  // kernel writes in place.
  const ring = threaded ? createRingMemory(RUN_RING_SLOTS) : null;
  const pipeline = createPipeline({ ...chain, calibration, ...(ring?.memory ? { kernelMemory: ring.memory } : {}) });
  const combined = layout === undefined ? null : createChannelPipeline({ ...chain, channels: layout });
  const harmonicCorrection = options.harmonics === undefined ? null : createHarmonicCorrection(options.harmonics);
  const metresPerRad = pipeline.stages.displacement.metresPerFringe / (2 * Math.PI);
  const mid = adcMidScale(adc);
  const config: AnalysisConfig = {
    calibration,
    layout: layout ?? null,
    mid,
    rateHz: info.rateHz,
    metresPerRad,
    maxPlotPoints: options.maxPlotPoints ?? 2000,
    totalSamples: info.totalSamples,
    ...(options.modelWatch === undefined ? {} : { modelWatch: options.modelWatch }),
    ...(options.estimateHarmonics === undefined ? {} : { estimateHarmonics: options.estimateHarmonics }),
  };
  const schedule = createAnalysisSchedule({ blockSamples: CAPTURE_BLOCK_SAMPLES, totalSamples: info.totalSamples, budgetSamples: options.analysisBudgetSamples });
  let blockIndex = 0;
  // The figures keep a few samples a block: drawn here, so that the analyses need the samples of analysed blocks only.
  const figure = createFigureSampler(config.maxPlotPoints, calibration);
  // Three or four outputs with a harmonic correction: the radius analysis takes the phase from before it.
  const keepPhase = combined !== null && harmonicCorrection !== null;
  // The harmonic correction and the harmonics' estimate take every block's phase.
  const phaseAlways = harmonicCorrection !== null || options.estimateHarmonics !== undefined;
  let analyses: AnalysisThread | null = null;
  const events: AlarmEvent[] = [];
  const alarmCounts: Record<AlarmKind, number> = { lowSignal: 0, saturation: 0, badSample: 0, overspeed: 0, inputGap: 0, countLost: 0, lowPower: 0 };
  const spans: AlarmSpan[] = [];
  const open = new Map<AlarmKind, number>();
  const secondsPerSample = 1 / info.rateHz;
  let samples = 0;
  let finalPositionM = 0;
  let results: AnalysisResults;

  progress.start(`replay ${path}`, info.totalSamples);
  try {
    // Inside the try: analyses refused (an option, a worker that cannot start) still close the capture.
    analyses = ring === null ? analysesInLine(config) : startAnalysisThread(config, ring);
    for await (const block of capture.blocks()) {
      const n = block.length;
      events.length = 0;
      if (options.refractiveIndexAt !== undefined) {
        const index = options.refractiveIndexAt((block.firstIndex + n / 2) * secondsPerSample);
        (combined ?? pipeline).setRefractiveIndex(index);
      }
      const output = await analyses.next();
      const analysed = schedule.take(blockIndex++);
      // Two outputs: the unwrapped phase costs a pass of its own, and only analysed blocks read it.
      if (combined === null) pipeline.process(block.x, block.y, n, analysed || phaseAlways ? output : withoutPhase(output), events);
      else combined.process(block.channels, n, output, events);
      let phaseBeforeHarmonics: Float64Array | null = null;
      if (keepPhase) {
        phaseBeforeHarmonics = analyses.phaseSlot();
        phaseBeforeHarmonics.set(output.unwrappedPhaseRad.subarray(0, n));
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
      figure.add(block.x, block.y, n, combined === null ? null : output);
      const handed = { firstIndex: block.firstIndex, length: n, t: block.t, analysed, x: analysed ? block.x : null, y: analysed ? block.y : null, phaseBeforeHarmonics };
      analyses.add(handed);
      samples += n;
      finalPositionM = output.positionM[n - 1]!;
      progress.update(block.firstIndex + n);
    }
    results = await analyses.finish();
  } catch (error) {
    await analyses?.terminate();
    throw error;
  } finally {
    progress.stop();
    await capture.close();
  }
  for (const [kind, start] of open) if (spans.length < MAX_SPANS) spans.push({ kind, startS: start, endS: Number.NaN });
  return {
    ...results,
    analysedEvery: schedule.every,
    report: { ...results.report, raw: figure.raw(), corrected: figure.corrected() },
    info,
    samples,
    metresPerRad,
    speedLimits: pipeline.speedLimits,
    finalPositionM,
    countLostAtEnd: (combined ?? pipeline).countLost,
    adcStated,
    alarmCounts,
    alarmSpans: spans,
    beforeNotApplicable: beforeNotApplicable(layout, calibration, mid),
  };
}

/** What the periodic-error and radius analyses alone give (calibrate's summary and file without a report). */
export type CaptureAnalysis = Pick<
  RunResult,
  'info' | 'samples' | 'metresPerRad' | 'before' | 'after' | 'afterNotMeasured' | 'residual' | 'power' | 'beforeNotApplicable' | 'analysedEvery'
>;

/**
 * Samples run through the chain, from its state after reset, before each analysed block when only those are read:
 * its alarm holds (32 samples by default) and velocity loop settle, so the block's flags and phase are the whole
 * run's (the phase up to whole turns).
 */
export const SETTLE_SAMPLES = CAPTURE_BLOCK_SAMPLES;

/** Samples of the settling run passed on their own, through which the chain starts (see analyseCapture). */
const START_SAMPLES = 1;

/** The analyses whose results analyseCapture gives (not the series and alarms of a whole run). */
const PART_ANALYSES: readonly AnalysisName[] = ['before', 'after', 'residual'];

/**
 * Those analyseCapture's worker runs on a long capture, while this thread runs the pipeline over the parts and the
 * radius residual: about as long on each (a profile of calibrate on 3·10⁷ samples, all in line: phase-domain
 * estimate 166 ms and periodic error before correction 61, pipeline 104 and radius residual 145).
 */
const WORKER_ANALYSES: readonly AnalysisName[] = ['after', 'before'];

/** What analyseCapture's options decide about which samples it reads. */
type AnalysedRead = Pick<RunOptions, 'channels' | 'analysisBudgetSamples'>;

/**
 * The parts analyseCapture reads of a capture, as [startSample, sampleCount]: each block the analyses take, after
 * SETTLE_SAMPLES; null when it runs the capture through whole instead (not a two-output WAV capture of known length,
 * or one short enough that the analyses take every block).
 */
function analysedParts(info: CaptureInfo, options: AnalysedRead): { parts: Array<readonly [number, number]>; taken: number[]; every: number } | null {
  const total = info.totalSamples;
  if (info.format !== 'wav' || total === null || options.channels !== undefined) return null;
  const schedule = createAnalysisSchedule({ blockSamples: CAPTURE_BLOCK_SAMPLES, totalSamples: total, budgetSamples: options.analysisBudgetSamples });
  if (schedule.every === 1) return null;
  const blocks = Math.ceil(total / CAPTURE_BLOCK_SAMPLES);
  const taken: number[] = [];
  for (let b = 0; b < blocks; b++) if (schedule.take(b)) taken.push(b);
  const parts = taken.map((b) => {
    const first = b * CAPTURE_BLOCK_SAMPLES;
    const settle = Math.min(first, SETTLE_SAMPLES);
    return [first - settle, settle + Math.min(CAPTURE_BLOCK_SAMPLES, total - first)] as const;
  });
  return { parts, taken, every: schedule.every };
}

/**
 * Where analyseCapture with these options would read parts of the capture: a keeper of them (for a pass over the
 * whole capture before it, such as the fit's), else null.
 */
export function keepAnalysedParts(info: CaptureInfo, options: AnalysedRead): KeptParts | null {
  const read = analysedParts(info, options);
  return read === null ? null : keepCaptureParts(read.parts, CAPTURE_BLOCK_SAMPLES, info.sampleEncoding);
}

/**
 * The periodic-error and radius analyses of a capture, without the rows, alarms and series of a whole run: of a
 * two-output WAV capture long enough that the analyses leave blocks out (createAnalysisSchedule), only the blocks
 * they take are read, each after SETTLE_SAMPLES through the chain, from `kept` when it holds them all
 * (keepAnalysedParts), else from the file; otherwise the whole run (runCapture).
 */
export async function analyseCapture(
  path: string,
  options: Omit<RunOptions, 'writer' | 'harmonics' | 'estimateHarmonics' | 'refractiveIndexAt'>,
  kept: KeptParts | null = null,
): Promise<CaptureAnalysis> {
  const { calibration, progress } = options;
  const opened = await openCapture(path, { ...options.open, blockSize: CAPTURE_BLOCK_SAMPLES });
  const info = opened.info;
  await opened.close();
  const read = analysedParts(info, options);
  if (read === null) return runCapture(path, options);
  const total = info.totalSamples!;
  const { parts, taken } = read;
  const { chain, adc } = chainOf(info, options);
  const pipeline = createPipeline({ ...chain, calibration });
  const metresPerRad = pipeline.stages.displacement.metresPerFringe / (2 * Math.PI);
  const mid = adcMidScale(adc);
  const config = { calibration, layout: null, mid, rateHz: info.rateHz, metresPerRad, maxPlotPoints: 2, totalSamples: total };
  // The settling samples' output.
  const scratch = createBlockOutput();
  const events: AlarmEvent[] = [];
  // On a second thread for a long capture, as runCapture, where they share the analyses with this thread, which
  // would only wait for them otherwise (WORKER_ANALYSES); only those whose results analyseCapture gives.
  const threaded = useAnalysisThread(options.analysisThread ?? 'auto', total);
  const mine = PART_ANALYSES.filter((name) => !WORKER_ANALYSES.includes(name));
  const analyses = threaded ? startAnalysisThread({ ...config, analyses: WORKER_ANALYSES }) : analysesInLine({ ...config, analyses: PART_ANALYSES });
  const rest = threaded ? createCaptureAnalyses({ ...config, analyses: mine }) : null;
  let results: AnalysisResults;
  progress.start(`analyse ${path} (one block in ${read.every})`, total);
  // Each analysed block as a part of its own, after SETTLE_SAMPLES: kept, or read (openCaptureParts).
  const partsRead = kept?.complete === true ? kept.parts() : openCaptureParts(path, { readChunkBytes: PART_READ_BYTES, ...options.open, blockSize: CAPTURE_BLOCK_SAMPLES }, parts);
  try {
    // Blocks left out pass as one length each run of them (skip(a) then skip(b) is skip(a + b)).
    let skipped = 0;
    const passSkipped = async () => {
      if (skipped === 0) return;
      await analyses.next();
      analyses.skip(skipped);
      rest?.skip(skipped);
      skipped = 0;
    };
    let passedTo = 0; // samples before this point are analysed or passed
    let next = 0;
    for await (const part of partsRead) {
      const first = taken[next++]! * CAPTURE_BLOCK_SAMPLES;
      const n = Math.min(CAPTURE_BLOCK_SAMPLES, total - first);
      skipped += first - passedTo;
      passedTo = first + n;
      await passSkipped();
      pipeline.reset();
      let analysed = false;
      for await (const block of part.blocks()) {
        events.length = 0;
        if (block.firstIndex < first) {
          // After a reset the chain starts on its first sample in the JavaScript stages, and takes a block that starts
          // there whole; the rest of the block then takes the steady path (the same output: the chain does not
          // depend on where blocks begin).
          const head = Math.min(START_SAMPLES, block.length);
          pipeline.process(block.x.subarray(0, head), block.y.subarray(0, head), head, scratch, events);
          pipeline.process(block.x.subarray(head), block.y.subarray(head), block.length - head, scratch, events);
          continue;
        }
        // The output arrays are a block long; the analyses read the first `length` (as in runCapture).
        const output = await analyses.next();
        pipeline.process(block.x, block.y, block.length, output, events);
        const handed = { firstIndex: first, length: block.length, t: null, analysed: true, x: block.x, y: block.y, phaseBeforeHarmonics: null };
        analyses.add(handed);
        // The slot is the worker's now, but not written by either side until `next` hands it out again.
        rest?.add({ ...handed, output });
        analysed = true;
      }
      if (!analysed) throw new Error(`${path}: samples ${first}..${first + n - 1} could not be read`);
      progress.update(first + n);
    }
    skipped += total - passedTo;
    await passSkipped();
    const theirs = await analyses.finish();
    results = rest === null ? theirs : joinAnalyses(rest.finish(), mine, theirs);
  } catch (error) {
    await analyses.terminate();
    throw error;
  } finally {
    progress.stop();
  }
  return {
    info,
    samples: total,
    metresPerRad,
    before: results.before,
    after: results.after,
    afterNotMeasured: results.afterNotMeasured,
    residual: results.residual,
    power: null,
    beforeNotApplicable: beforeNotApplicable(undefined, calibration, mid),
    analysedEvery: read.every,
  };
}
