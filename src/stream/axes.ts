// Axis builder: one shared signal chain per axis over a block stream, and per-subscriber updates at the
// subscriber's own rate (latest values plus min/max since its last update), so no subscriber holds the
// chain back and nothing queues without bound.

import { asyncScheduler, distinctUntilChanged, filter, interval, map, mergeMap, Observable, share, type Observer, type SchedulerLike, type Subscription } from 'rxjs';
import {
  alarmText,
  AlarmBit,
  createChannelPipeline,
  createCorrection,
  createHarmonicCorrection,
  createModelWatch,
  finiteNumber,
  integerInRange,
  OptionError,
  positiveFinite,
  validateRefractiveIndex,
  type AlarmEvent,
  type ChannelParameters,
  type ChannelPipeline,
  type Correction,
  type HarmonicCorrection,
  type ModelWatch,
  type ModelWatchEvent,
  type ModelWatchOptions,
  type PhaseHarmonics,
  type Pipeline,
  type PipelineOptions,
  type SampleArray,
  type SpeedLimits,
} from '../core/index.js';
import { createRecentViews, type RecentViews } from '../core/recent-views.js';
import { createAxisKernels, type AxisRegion, type BlockExtremes } from '../accel/axis-kernels.js';
import { createPipeline } from '../accel/pipeline.js';
import { checkAxisBlock, checkFrameBlock, type AxisBlock, type FrameBlock } from './blocks.js';

export interface AxisOptions extends PipelineOptions {
  /** Name in updates, feeds and logs: 1..32 characters of A–Z, a–z, 0–9, `_`, `-`. Default `axis<k>`. */
  readonly name?: string;
  /**
   * Axis of interleaved frames this axis reads: without a channel layout x is channel 2·channelPair and y the
   * next; with one (`FrameBlock.axisOutputs`), the outputs of that axis of the layout. Integer 0..7; default the
   * axis' place in the list.
   */
  readonly channelPair?: number;
  /**
   * Correction beyond the ellipse (a calibration file's `harmonics`, see createHarmonicCorrection), taken off the
   * phase and position of every sample after the pipeline, as replay does. Default none.
   */
  readonly harmonics?: PhaseHarmonics;
  /**
   * Watch for signals that leave the calibration's model (`calibration_stale`, see createModelWatch): its events go
   * to the summary's `modelEvents`. Only with a calibration (the level is then the corrected radius): without one
   * there is no model to watch and the option is checked but unused. Default off.
   */
  readonly modelWatch?: ModelWatchOptions;
  /**
   * Three or four detector outputs per axis: every output's parameters (from a calibration file of that layout).
   * The outputs are combined sample by sample into the power-normalised pair (`createChannelPipeline`); the axis
   * then takes only frames whose layout gives its frame axis as many outputs. `calibration` must be absent or null.
   */
  readonly channels?: readonly ChannelParameters[];
}

export interface AxesOptions extends AxesRunnerOptions, AxesViewOptions {
  /**
   * Refractive index of air on all axes as it changes during the run (e.g. `airIndex()` over sensor readings).
   * Each value rescales the readings from the next block on; the fringe counts are untouched.
   */
  readonly refractiveIndex$?: Observable<number>;
}

export interface UpdateOptions {
  /** Updates per second, in (0, 1000]. Absent: one update per block, synchronously (for loggers and latency). */
  readonly updateHz?: number;
  /** Include the recent raw and corrected trace points in each update. Default false. */
  readonly trace?: boolean;
  /**
   * Asked at each tick; when false the update is held back and the next one covers both intervals (min/max,
   * events). Lets a slow consumer (a full socket) take only the latest values. Default: always ready.
   */
  readonly ready?: () => boolean;
}

/** Recent points of the Lissajous figure, oldest first: raw x, y in input units, corrected u, v (unit circle when calibrated). */
export interface Trace {
  readonly x: number[];
  readonly y: number[];
  readonly u: number[];
  readonly v: number[];
}

/** One axis' state at an update. Non-finite numbers (no data, bad samples) are NaN. */
export interface AxisUpdate {
  readonly name: string;
  /** Absolute index of the sample the latest values belong to (−1 before any sample). */
  readonly sampleIndex: number;
  /** Samples this update covers (processed since the previous update of this subscriber, gaps included). */
  readonly samples: number;
  readonly positionM: number;
  readonly positionMinM: number;
  readonly positionMaxM: number;
  readonly velocityMS: number;
  readonly velocityMinMS: number;
  readonly velocityMaxMS: number;
  /** Normalised signal level of the latest sample (1 on the calibrated ellipse), and its minimum. */
  readonly level: number;
  readonly levelMin: number;
  /** `AlarmBit` flags of the latest sample, and all flags seen since the previous update. */
  readonly flags: number;
  readonly flagsSeen: number;
  readonly countLost: boolean;
  readonly events: readonly AlarmEvent[];
  readonly eventsDropped: number;
  /** `calibration_stale` (the axis' `modelWatch`) on the latest sample, and whether it was on at any time since the previous update. */
  readonly calibrationStale: boolean;
  readonly calibrationStaleSeen: boolean;
  /** Its changes since the previous update (at most `maxEventsPerUpdate`, the rest counted in `eventsDropped`). */
  readonly modelEvents: readonly ModelWatchEvent[];
  readonly trace?: Trace;
}

export interface AxesUpdate {
  readonly axes: readonly AxisUpdate[];
}

export interface PositionUpdate {
  readonly sampleIndex: number;
  readonly positionM: number;
  readonly minM: number;
  readonly maxM: number;
}

export interface VelocityUpdate {
  readonly sampleIndex: number;
  readonly velocityMS: number;
  readonly minMS: number;
  readonly maxMS: number;
}

export interface AxisStatus {
  readonly sampleIndex: number;
  readonly flags: number;
  /** `alarmText(flags)`: active alarm names separated by spaces, empty when none. */
  readonly alarms: string;
  readonly countLost: boolean;
  readonly speedLimits: SpeedLimits;
}

export interface AxisAlarmEvent extends AlarmEvent {
  readonly axis: string;
}

/**
 * One block's position block and summary for one axis. Reused for every block: read inside `next`. The extremes
 * (`positionMinM` … `flagsSeen`) are computed at their first read after the block.
 */
export interface AxisBlockSummary {
  readonly name: string;
  /** Absolute index of the block's first sample (lost samples counted). */
  readonly firstSampleIndex: number;
  readonly length: number;
  /** The block's raw samples of this axis, `length` of them. */
  readonly x: SampleArray;
  readonly y: SampleArray;
  /** The pipeline's output per sample, `length` of each. */
  readonly output: AxisSamples;
  readonly lostBefore: number;
  readonly sampleIndex: number;
  readonly positionM: number;
  readonly positionMinM: number;
  readonly positionMaxM: number;
  readonly velocityMS: number;
  readonly velocityMinMS: number;
  readonly velocityMaxMS: number;
  readonly level: number;
  readonly levelMin: number;
  readonly flags: number;
  readonly flagsSeen: number;
  readonly countLost: boolean;
  readonly events: readonly AlarmEvent[];
  /** The block's `calibration_stale` changes (the axis' `modelWatch` option), empty without it. */
  readonly modelEvents: readonly ModelWatchEvent[];
  /** `calibration_stale` active after the block's last sample. */
  readonly calibrationStale: boolean;
  readonly speedLimits: SpeedLimits;
  /** Ring of recent trace points; `traceNext` is where the next point goes, `traceFilled` how many are valid. */
  readonly traceX: Float32Array;
  readonly traceY: Float32Array;
  readonly traceU: Float32Array;
  readonly traceV: Float32Array;
  readonly traceNext: number;
  readonly traceFilled: number;
}

/** Per-sample output of one axis for one block (views reused for the next block). */
export interface AxisSamples {
  readonly positionM: Float64Array;
  readonly velocityMS: Float64Array;
  readonly level: Float32Array;
  /** `AlarmBit` flags per sample. */
  readonly flags: Uint8Array;
  /** Three or four detector outputs: the source power per sample (1 = the calibration's mean power); absent for a pair. */
  readonly power?: Float32Array;
}

export interface Axis {
  readonly name: string;
  readonly index: number;
  position$(options?: UpdateOptions): Observable<PositionUpdate>;
  velocity$(options?: UpdateOptions): Observable<VelocityUpdate>;
  update$(options?: UpdateOptions): Observable<AxisUpdate>;
  /** Every alarm state change, as it happens (already rare: state changes only). */
  readonly alarms$: Observable<AxisAlarmEvent>;
  /** The axis status, emitted when its active alarms or count-lost latch change (checked per block). */
  readonly status$: Observable<AxisStatus>;
}

export interface Axes {
  readonly axes: readonly Axis[];
  readonly names: readonly string[];
  /** All axes in one update, at the subscriber's rate. */
  update$(options?: UpdateOptions): Observable<AxesUpdate>;
  /** Alarm events of every axis. */
  readonly alarms$: Observable<AxisAlarmEvent>;
  /** The shared per-block summaries (reused objects: read inside `next`). */
  readonly blocks$: Observable<readonly AxisBlockSummary[]>;
  /**
   * Keeps the shared chain running while no one else subscribes, so positions keep their reference across
   * subscribers coming and going. Unsubscribe the result to stop. Without an error handler, a source error
   * is reported by rxjs as unhandled (never dropped).
   */
  connect(observer?: Partial<Observer<unknown>>): Subscription;
  /** Sets the refractive index of air on all axes from the next block on (the scale changes, not the count). */
  setRefractiveIndex(refractiveIndex: number): void;
}

const NAME_PATTERN = /^[A-Za-z0-9_-]{1,32}$/;

/** What the pipelines need: the axes and the trace kept per axis. */
export interface AxesRunnerOptions {
  /** One entry per axis, 1..8; axis k reads channels 2k (x) and 2k + 1 (y) of each frame. */
  readonly axes: readonly AxisOptions[];
  /** Recent raw and corrected points kept per axis for a Lissajous view. Default 256; integer 0..4096. */
  readonly tracePoints?: number;
  /** Trace points taken from each block, evenly spaced. Default 16; integer 1..4096. */
  readonly tracePointsPerBlock?: number;
}

/**
 * The shared half of the axis builder: one pipeline per axis, one position block per axis per input block.
 * Everything a subscriber sees (rows, updates, alarms, status) is made from these summaries.
 */
export interface AxesRunner {
  readonly names: readonly string[];
  /**
   * Runs every axis over one block and returns the summaries (the same objects each time, overwritten by the
   * next block). Throws an OptionError for a malformed block or one without the channels the axes need.
   */
  process(block: FrameBlock | AxisBlock): readonly AxisBlockSummary[];
  /** Sets the refractive index of air on all axes from the next block on; kept across `reset()`. */
  setRefractiveIndex(refractiveIndex: number): void;
  /**
   * Re-references axis `axis` (every axis when undefined) at absolute sample `atSampleIndex` (default: its next
   * sample): the position there reads `presetM` (default 0, a zero) and the count-lost latch clears there.
   */
  reReference(options?: { readonly axis?: number; readonly atSampleIndex?: number; readonly presetM?: number }): void;
  /** Absolute index of the next sample the axes will process. */
  readonly nextSampleIndex: number;
  /** The summaries of the latest block (the objects `process` returns). */
  readonly summaries: readonly AxisBlockSummary[];
  /** Every axis back to its first sample (index 0, zero position), options and refractive index kept. */
  reset(): void;
}

/** What the runner needs of either chain: the two-output pipeline or the 3–4-output one. */
type AxisChain = Pick<Pipeline, 'markGap' | 'reReference' | 'setRefractiveIndex' | 'reset' | 'nextSampleIndex' | 'speedLimits' | 'countLost'>;

interface AxisStage {
  readonly pipeline: AxisChain;
  /** Exactly one of these runs the axis. */
  readonly plain: Pipeline | null;
  readonly combined: ChannelPipeline | null;
  /** Detector outputs the axis takes: 2 for `plain`, 3 or 4 for `combined`. */
  readonly outputs: number;
  /** Axis of the frames the axis reads (`channelPair`). */
  readonly frameAxis: number;
  /** Views of exactly one block's length on the axis' region of the kernels, for the last two lengths. */
  readonly views: RecentViews<BlockViews>;
  /** The region those views are on: the kernels replace it when their capacity grows. */
  viewsRegion: AxisRegion | null;
  /** Source power per sample of a 3–4-output axis (grown to the longest block). */
  power: Float32Array;
  readonly correction: Correction;
  readonly summary: MutableSummary;
  /** Added to the pipeline's position: the preset of the latest re-reference (0 after a zero). */
  offsetM: number;
  /** A re-reference not yet reached: its sample and preset. */
  pendingAt: number;
  pendingPresetM: number;
  /** The harmonic correction and the model watch of the axis' options, with their block buffers, or null. */
  readonly beyond: BeyondEllipse | null;
}

/**
 * A block's extremes, computed when the summary's first read of one asks for them (`due`): a pass over the block's
 * outputs costs more than a tenth of the pipeline, and listen's rows and status line never read them.
 */
interface LazyExtremes {
  due: boolean;
  readonly values: BlockExtremes;
}

type ExtremeKey = keyof BlockExtremes;

interface BlockViews {
  /** The pair split out of the frames (x, y), or the 3–4 outputs. */
  readonly inputs: readonly Int16Array[];
  readonly out: AxisSamples;
  /** `out` with the source power (3–4-output axes; and the unwrapped phase for `beyond`), else null. */
  readonly combinedOut: (AxisSamples & { power: Float32Array; unwrappedPhaseRad?: Float64Array }) | null;
  /** `out` with the unwrapped phase (a pair with harmonics or a model watch), else null. */
  readonly beyondOut: (AxisSamples & { unwrappedPhaseRad: Float64Array }) | null;
}

interface BeyondEllipse {
  readonly harmonics: HarmonicCorrection | null;
  readonly watch: ModelWatch | null;
  phase: Float64Array;
  use: Uint8Array;
}

/** The summary's own fields; the extremes are read-only accessors (`LazyExtremes`). */
type MutableSummary = { -readonly [K in Exclude<keyof AxisBlockSummary, ExtremeKey>]: AxisBlockSummary[K] } & Pick<AxisBlockSummary, ExtremeKey> & {
  events: AlarmEvent[];
  modelEvents: ModelWatchEvent[];
};

/** Samples whose signal itself is in doubt stay out of the model watch (a blocked beam is not a model change). */
const SIGNAL_TROUBLE = AlarmBit.lowSignal | AlarmBit.saturation | AlarmBit.badSample | AlarmBit.inputGap;

/** The pipeline's phase through the harmonic correction (positions too), and the level into the model watch. */
function beyondEllipse(stage: AxisStage, beyond: BeyondEllipse, out: { positionM: Float64Array; level: Float32Array; flags: Uint8Array }, length: number): void {
  const summary = stage.summary;
  if (summary.modelEvents.length !== 0) summary.modelEvents.length = 0;
  beyond.harmonics?.process(beyond.phase, length, out.positionM, (stage.plain ?? stage.combined)!.stages.displacement.metresPerFringe / (2 * Math.PI));
  if (beyond.watch !== null) {
    const use = beyond.use;
    const flags = out.flags;
    for (let i = 0; i < length; i++) use[i] = (flags[i]! & SIGNAL_TROUBLE) === 0 ? 1 : 0;
    beyond.watch.processRadius(out.level, length, summary.firstSampleIndex, summary.modelEvents, use);
    summary.calibrationStale = beyond.watch.active;
  }
}

function growBeyond(beyond: BeyondEllipse, length: number): void {
  beyond.phase = new Float64Array(length);
  beyond.use = new Uint8Array(length);
}

/** Adds the stage's preset to a block's positions, switching to a pending one at its sample. */
function applyPreset(stage: AxisStage, positionM: Float64Array, length: number, firstIndex: number): void {
  let offset = stage.offsetM;
  const switchAt = stage.pendingAt >= 0 ? Math.max(0, stage.pendingAt - firstIndex) : length;
  for (let i = 0; i < length; i++) {
    if (i === switchAt) {
      offset = stage.pendingPresetM;
      stage.pendingAt = -1;
    }
    positionM[i] = positionM[i]! + offset;
  }
  stage.offsetM = offset;
}

export function createAxesRunner(options: AxesRunnerOptions): AxesRunner {
  const axisCount = integerInRange('axes.length', options.axes.length, 1, 8);
  const names = options.axes.map((axis, k) => {
    const name = axis.name ?? `axis${k}`;
    if (!NAME_PATTERN.test(name)) throw new OptionError(`axes[${k}].name`, '1..32 characters of A-Z a-z 0-9 _ -', name);
    return name;
  });
  if (new Set(names).size !== names.length) throw new OptionError('axes[].name', 'unique', names);
  const tracePoints = integerInRange('tracePoints', options.tracePoints ?? 256, 0, 4096);
  const tracePerBlock = integerInRange('tracePointsPerBlock', options.tracePointsPerBlock ?? 16, 1, 4096);
  let refractiveIndex: number | null = null;
  const extremes: LazyExtremes[] = options.axes.map(() => ({ due: false, values: noExtremes() }));
  /** Axis k's extremes of its latest block, computed at the first call after the block. */
  const extremesOf = (k: number) => (): BlockExtremes => {
    const lazy = extremes[k]!;
    if (lazy.due) {
      lazy.due = false;
      kernels.summarise(k, stages[k]!.summary.length, lazy.values);
    }
    return lazy.values;
  };
  // Creating the pipelines validates every axis' options.
  const stages: AxisStage[] = options.axes.map((axisOptions, k) => {
    const frameAxis = integerInRange(`axes[${k}].channelPair`, axisOptions.channelPair ?? k, 0, 7);
    const { channels, name: _name, channelPair: _pair, ...pipelineOptions } = axisOptions;
    let combined: ChannelPipeline | null = null;
    if (channels !== undefined) {
      if (axisOptions.calibration !== undefined && axisOptions.calibration !== null) {
        throw new OptionError(`axes[${k}].calibration`, 'null or absent when channels are given (the outputs\' parameters calibrate the axis)', axisOptions.calibration);
      }
      const { calibration: _calibration, frontEnd: _frontEnd, harmonics: _harmonics, modelWatch: _watch, ...rest } = pipelineOptions;
      try {
        combined = createChannelPipeline({ ...rest, channels });
      } catch (error) {
        if (error instanceof OptionError) throw new OptionError(`axes[${k}].${error.option}`, error.rule, error.value);
        throw error;
      }
    }
    const plain = combined === null ? createPipeline(axisOptions) : null;
    const pipeline: AxisChain = combined ?? plain!;
    const harmonics = axisOptions.harmonics === undefined ? null : createHarmonicCorrection(axisOptions.harmonics);
    // Checked either way; without a calibration there is no model to watch (the level is then the raw radius). With
    // 3–4 outputs the level is the power-normalised radius of their calibrated model, as replay watches it.
    const checkedWatch = axisOptions.modelWatch === undefined ? null : createModelWatch(axisOptions.modelWatch);
    const watch = combined === null && (axisOptions.calibration === undefined || axisOptions.calibration === null) ? null : checkedWatch;
    return {
      pipeline,
      plain,
      combined,
      outputs: combined === null ? 2 : combined.stages.combiner.channels.length,
      frameAxis,
      views: createRecentViews((length) => viewsOf(stages[k]!, length)),
      viewsRegion: null,
      power: new Float32Array(0),
      correction: createCorrection({ calibration: combined === null ? (axisOptions.calibration ?? null) : null }),
      summary: createSummary(names[k]!, pipeline.speedLimits, tracePoints, extremesOf(k)),
      offsetM: 0,
      pendingAt: -1,
      pendingPresetM: 0,
      beyond: harmonics === null && watch === null ? null : { harmonics, watch, phase: new Float64Array(0), use: new Uint8Array(0) },
    };
  });
  const summaries: readonly AxisBlockSummary[] = stages.map((stage) => stage.summary);
  // The split of the frames and the block summaries (WebAssembly SIMD where it exists); the pipelines read from
  // and write into its memory.
  // Room for the blocks the options announce (`blockCapacity`); without it the first block sets it.
  const kernels = createAxisKernels(
    stages.map((stage) => stage.outputs),
    Math.max(0, ...options.axes.map((axis) => axis.blockCapacity ?? 0)),
  );
  const axesNeeded = Math.max(...stages.map((stage) => stage.frameAxis + 1));
  const firstChannel = new Int32Array(9);
  const pick = { x: new Float64Array(tracePerBlock), y: new Float64Array(tracePerBlock), u: new Float64Array(tracePerBlock), v: new Float64Array(tracePerBlock) };

  function viewsOf(stage: AxisStage, length: number): BlockViews {
    const region = stage.viewsRegion!;
    const out: AxisSamples = {
      positionM: region.positionM.subarray(0, length),
      velocityMS: region.velocityMS.subarray(0, length),
      level: region.level.subarray(0, length),
      flags: region.flags.subarray(0, length),
    };
    const beyond = stage.beyond;
    const phase = beyond === null ? {} : { unwrappedPhaseRad: beyond.phase };
    return {
      inputs: region.inputs.map((input) => input.subarray(0, length)),
      out,
      combinedOut: stage.combined === null ? null : { ...out, power: stage.power.subarray(0, length), ...phase },
      beyondOut: beyond === null || stage.combined !== null ? null : { ...out, unwrappedPhaseRad: beyond.phase },
    };
  }

  /** Runs axis k over one block: its samples are the split ones in the kernels' region, or `raw` (an AxisBlock). */
  function processAxis(k: number, raw: AxisBlock | null, length: number, gapBefore: number): void {
    const stage = stages[k]!;
    const { pipeline, summary } = stage;
    if (gapBefore > 0) pipeline.markGap(gapBefore);
    // Only when not empty: setting an array's length is a call into the runtime (~0.1 µs), even to the same value.
    if (summary.events.length !== 0) summary.events.length = 0;
    summary.firstSampleIndex = pipeline.nextSampleIndex;
    const region = kernels.regions[k]!;
    const beyond = stage.beyond;
    const growPower = stage.combined !== null && stage.power.length < length;
    const growPhase = beyond !== null && beyond.phase.length < length;
    if (region !== stage.viewsRegion || growPower || growPhase) {
      // The views refer to arrays replaced here (or by the kernels).
      stage.views.clear();
      stage.viewsRegion = region;
      if (growPower) stage.power = new Float32Array(length);
      if (growPhase) growBeyond(beyond, length);
    }
    const views = stage.views.get(length);
    const out = views.out;
    let x: SampleArray = raw === null ? views.inputs[0]! : raw.x;
    let y: SampleArray = raw === null ? views.inputs[1]! : raw.y;
    if (stage.combined !== null) {
      stage.combined.process(views.inputs, length, views.combinedOut!, summary.events);
      if (beyond !== null) beyondEllipse(stage, beyond, out, length);
      // The trace and the summary's samples are the power-normalised pair (on the unit circle).
      x = stage.combined.pair.u;
      y = stage.combined.pair.v;
    } else if (beyond === null) stage.plain!.process(x, y, length, out, summary.events);
    else {
      stage.plain!.process(x, y, length, views.beyondOut!, summary.events);
      beyondEllipse(stage, beyond, out, length);
    }
    if (stage.offsetM !== 0 || stage.pendingAt >= 0) applyPreset(stage, out.positionM, length, summary.firstSampleIndex);
    summary.x = x;
    summary.y = y;
    summary.output = views.combinedOut ?? out;
    summarise(summary, out, length, gapBefore, pipeline);
    const lazy = extremes[k]!;
    lazy.due = length > 0;
    if (length === 0) Object.assign(lazy.values, noExtremes());
    if (tracePoints > 0 && length > 0) {
      const count = Math.min(tracePerBlock, length);
      const step = length / count;
      const { x: pickX, y: pickY, u: pickU, v: pickV } = pick;
      for (let j = 0; j < count; j++) {
        const i = Math.floor(j * step);
        pickX[j] = x[i]!;
        pickY[j] = y[i]!;
      }
      stage.correction.process(pickX, pickY, pickU, pickV, count);
      // The ring in locals, its place wrapped by a compare (a remainder is an integer division a point).
      const { traceX, traceY, traceU, traceV } = summary;
      let at = summary.traceNext;
      for (let j = 0; j < count; j++) {
        traceX[at] = pickX[j]!;
        traceY[at] = pickY[j]!;
        traceU[at] = pickU[j]!;
        traceV[at] = pickV[j]!;
        at = at + 1 === tracePoints ? 0 : at + 1;
      }
      summary.traceNext = at;
      summary.traceFilled = Math.min(tracePoints, summary.traceFilled + count);
    }
  }

  return {
    names,
    process(block) {
      if ('samples' in block) {
        checkFrameBlock(block);
        const layout = block.axisOutputs;
        const frameAxes = layout === undefined ? block.channelCount >> 1 : layout.length;
        if (frameAxes < axesNeeded) {
          if (layout === undefined || layout.every((outputs) => outputs === 2)) {
            throw new OptionError('block.channelCount', `at least ${2 * axesNeeded} for the axes' channels`, block.channelCount);
          }
          throw new OptionError('block.axisOutputs', `outputs for at least ${axesNeeded} axes`, layout);
        }
        for (let a = 0; a < frameAxes; a++) firstChannel[a + 1] = firstChannel[a]! + (layout === undefined ? 2 : layout[a]!);
        const n = block.samplesPerFrame;
        for (let k = 0; k < axisCount; k++) {
          const stage = stages[k]!;
          const outputs = firstChannel[stage.frameAxis + 1]! - firstChannel[stage.frameAxis]!;
          if (outputs !== stage.outputs) {
            throw new OptionError(
              `axes[${k}]`,
              `frames whose axis ${stage.frameAxis} has the ${stage.outputs} detector outputs the axis is set up for` +
                (stage.outputs === 2 ? ' (give the parameters of 3 or 4 outputs as channels)' : ''),
              `${outputs} outputs`,
            );
          }
        }
        kernels.load(block.samples, n, block.channelCount);
        for (let k = 0; k < axisCount; k++) {
          kernels.split(k, firstChannel[stages[k]!.frameAxis]!);
          processAxis(k, null, n, block.gapBefore ?? 0);
        }
      } else {
        if (axisCount !== 1) throw new OptionError('block', `FrameBlocks for ${axisCount} axes (an AxisBlock carries one axis)`, 'an AxisBlock');
        if (stages[0]!.combined !== null) throw new OptionError('block', `FrameBlocks for an axis of ${stages[0]!.outputs} detector outputs (an AxisBlock carries a pair)`, 'an AxisBlock');
        checkAxisBlock(block);
        kernels.reserve(block.length);
        processAxis(0, block, block.length, block.gapBefore ?? 0);
      }
      return summaries;
    },
    setRefractiveIndex(next) {
      validateRefractiveIndex(next);
      for (const stage of stages) stage.pipeline.setRefractiveIndex(next);
      refractiveIndex = next;
    },
    reReference(request = {}) {
      const { axis } = request;
      if (axis !== undefined) integerInRange('axis', axis, 0, axisCount - 1);
      const presetM = finiteNumber('presetM', request.presetM ?? 0);
      for (const [k, stage] of stages.entries()) {
        if (axis !== undefined && axis !== k) continue;
        // The pipeline zeroes the position at the sample; the preset is added from there on.
        stage.pipeline.reReference(request.atSampleIndex);
        stage.pendingAt = request.atSampleIndex ?? stage.pipeline.nextSampleIndex;
        stage.pendingPresetM = presetM;
      }
    },
    get nextSampleIndex() {
      return stages[0]!.pipeline.nextSampleIndex;
    },
    summaries,
    reset() {
      stages.forEach((stage, k) => {
        stage.pipeline.reset();
        stage.beyond?.watch?.reset();
        stage.offsetM = 0;
        stage.pendingAt = -1;
        if (refractiveIndex !== null) stage.pipeline.setRefractiveIndex(refractiveIndex);
        Object.assign(stage.summary, blankSummary(names[k]!, stage.pipeline.speedLimits));
        for (const trace of [stage.summary.traceX, stage.summary.traceY, stage.summary.traceU, stage.summary.traceV]) trace.fill(0);
        extremes[k]!.due = false;
        Object.assign(extremes[k]!.values, noExtremes());
      });
    },
  };
}

/** What the per-subscriber half needs besides the shared summaries. */
export interface AxesViewOptions {
  /** Alarm events carried per axis in one update; more in one interval are counted in `eventsDropped`. Default 64; integer 1..65536. */
  readonly maxEventsPerUpdate?: number;
  /** Scheduler of the update timers. Default `asyncScheduler`; tests pass a `TestScheduler`. */
  readonly scheduler?: SchedulerLike;
}

/**
 * Builds the axes over `source$`: interleaved frames (any axis count the frames carry at least) or, for a
 * single axis, `AxisBlock`s. The chains start with the first subscriber and stop after the last one leaves
 * (or when `connect()`'s subscription ends); a restart counts from zero again. Input buffers are read
 * synchronously and never kept.
 */
export function createAxes(source$: Observable<FrameBlock | AxisBlock>, options: AxesOptions): Axes {
  const runner = createAxesRunner(options);
  const blocks$ = new Observable<readonly AxisBlockSummary[]>((subscriber) => {
    runner.reset();
    const indexSubscription = options.refractiveIndex$?.subscribe({
      next(value) {
        try {
          runner.setRefractiveIndex(value);
        } catch (error) {
          subscriber.error(error);
        }
      },
      error: (error: unknown) => subscriber.error(error),
    });
    const subscription = source$.subscribe({
      next(block) {
        let summaries: readonly AxisBlockSummary[];
        try {
          summaries = runner.process(block);
        } catch (error) {
          subscriber.error(error);
          return;
        }
        subscriber.next(summaries);
      },
      error: (error: unknown) => subscriber.error(error),
      complete: () => subscriber.complete(),
    });
    return () => {
      subscription.unsubscribe();
      indexSubscription?.unsubscribe();
    };
  });
  return createAxesView(blocks$, runner, options);
}

/**
 * The per-subscriber half of the axis builder over a stream of shared summaries (from `createAxesRunner`):
 * updates at each subscriber's own rate, alarms and status. `blocks$` is shared here; it is subscribed while
 * anyone listens or `connect()` holds it.
 */
export function createAxesView(
  summaries$: Observable<readonly AxisBlockSummary[]>,
  runner: Pick<AxesRunner, 'names' | 'setRefractiveIndex'>,
  options: AxesViewOptions = {},
): Axes {
  const { names } = runner;
  const axisCount = names.length;
  const maxEvents = integerInRange('maxEventsPerUpdate', options.maxEventsPerUpdate ?? 64, 1, 65536);
  const scheduler = options.scheduler ?? asyncScheduler;
  // The running chain's latest summaries, so a subscriber joining mid-stream starts from the current state.
  let current: readonly AxisBlockSummary[] | null = null;
  const blocks$ = new Observable<readonly AxisBlockSummary[]>((subscriber) => {
    const subscription = summaries$.subscribe({
      next(summaries) {
        current = summaries;
        subscriber.next(summaries);
      },
      error: (error: unknown) => subscriber.error(error),
      complete: () => subscriber.complete(),
    });
    return () => {
      subscription.unsubscribe();
      current = null;
    };
  }).pipe(share());

  function update$(updateOptions: UpdateOptions = {}): Observable<AxesUpdate> {
    const periodMs = updateOptions.updateHz === undefined ? 0 : 1000 / rate(updateOptions.updateHz);
    const withTrace = updateOptions.trace === true;
    const ready = updateOptions.ready ?? (() => true);
    return new Observable<AxesUpdate>((subscriber) => {
      const accumulators = names.map((name) => createAccumulator(name, maxEvents));
      let latest = current;
      let pending = latest !== null;
      if (latest !== null) for (let k = 0; k < axisCount; k++) accumulators[k]!.seed(latest[k]!);
      function emit(): void {
        pending = false;
        subscriber.next({ axes: accumulators.map((accumulator, k) => accumulator.take(withTrace ? latest![k]! : null)) });
      }
      const ticks = periodMs > 0 ? interval(periodMs, scheduler).subscribe(() => pending && ready() && emit()) : null;
      if (ticks === null && pending) emit();
      const blocks = blocks$.subscribe({
        next(summaries) {
          for (let k = 0; k < axisCount; k++) accumulators[k]!.merge(summaries[k]!);
          latest = summaries;
          pending = true;
          if (ticks === null) emit();
        },
        error(error: unknown) {
          if (pending) emit();
          subscriber.error(error);
        },
        complete() {
          if (pending) emit();
          subscriber.complete();
        },
      });
      return () => {
        ticks?.unsubscribe();
        blocks.unsubscribe();
        latest = null;
      };
    });
  }

  const alarms$ = blocks$.pipe(
    mergeMap((summaries) => {
      const events: AxisAlarmEvent[] = [];
      for (const summary of summaries) for (const event of summary.events) events.push({ ...event, axis: summary.name });
      return events;
    }),
  );

  const axes: Axis[] = names.map((name, index) => {
    const axisUpdate$ = (updateOptions?: UpdateOptions) => update$(updateOptions).pipe(map((update) => update.axes[index]!));
    return {
      name,
      index,
      update$: axisUpdate$,
      position$: (updateOptions?: UpdateOptions) =>
        axisUpdate$(updateOptions).pipe(
          map((u) => ({ sampleIndex: u.sampleIndex, positionM: u.positionM, minM: u.positionMinM, maxM: u.positionMaxM })),
        ),
      velocity$: (updateOptions?: UpdateOptions) =>
        axisUpdate$(updateOptions).pipe(
          map((u) => ({ sampleIndex: u.sampleIndex, velocityMS: u.velocityMS, minMS: u.velocityMinMS, maxMS: u.velocityMaxMS })),
        ),
      alarms$: alarms$.pipe(filter((event) => event.axis === name)),
      status$: blocks$.pipe(
        map((summaries) => summaries[index]!),
        filter((summary) => summary.length > 0 || summary.lostBefore > 0),
        // The summary object is reused, so compare a key taken from it, not the object itself.
        distinctUntilChanged<AxisBlockSummary, number>((a, b) => a === b, (s) => s.flags | (s.countLost ? 256 : 0)),
        map((s) => ({ sampleIndex: s.sampleIndex, flags: s.flags, alarms: alarmText(s.flags), countLost: s.countLost, speedLimits: s.speedLimits })),
      ),
    };
  });

  return {
    axes,
    names,
    update$,
    alarms$,
    blocks$,
    connect: (observer) => blocks$.subscribe(observer),
    setRefractiveIndex: (refractiveIndex) => runner.setRefractiveIndex(refractiveIndex),
  };
}

function rate(updateHz: unknown): number {
  const value = positiveFinite('updateHz', updateHz);
  if (value > 1000) throw new OptionError('updateHz', 'a positive finite number up to 1000', value);
  return value;
}

const EMPTY_SAMPLES = new Int16Array(0);
const EMPTY_OUTPUT: AxisSamples = { positionM: new Float64Array(0), velocityMS: new Float64Array(0), level: new Float32Array(0), flags: new Uint8Array(0) };

/** The summary's fields before any block, but for the trace's arrays and the extremes. */
function blankSummary(name: string, speedLimits: SpeedLimits) {
  return {
    name,
    firstSampleIndex: 0,
    length: 0,
    x: EMPTY_SAMPLES as SampleArray,
    y: EMPTY_SAMPLES as SampleArray,
    output: EMPTY_OUTPUT,
    lostBefore: 0,
    sampleIndex: -1,
    positionM: Number.NaN,
    velocityMS: Number.NaN,
    level: Number.NaN,
    flags: 0,
    countLost: false,
    events: [] as AlarmEvent[],
    modelEvents: [] as ModelWatchEvent[],
    calibrationStale: false,
    speedLimits,
    traceNext: 0,
    traceFilled: 0,
  };
}

function noExtremes(): BlockExtremes {
  return { positionMinM: Number.NaN, positionMaxM: Number.NaN, velocityMinMS: Number.NaN, velocityMaxMS: Number.NaN, levelMin: Number.NaN, flagsSeen: 0 };
}

/** A summary whose extremes come from `extremes()` when read. */
function createSummary(name: string, speedLimits: SpeedLimits, tracePoints: number, extremes: () => BlockExtremes): MutableSummary {
  return {
    ...blankSummary(name, speedLimits),
    get positionMinM() {
      return extremes().positionMinM;
    },
    get positionMaxM() {
      return extremes().positionMaxM;
    },
    get velocityMinMS() {
      return extremes().velocityMinMS;
    },
    get velocityMaxMS() {
      return extremes().velocityMaxMS;
    },
    get levelMin() {
      return extremes().levelMin;
    },
    get flagsSeen() {
      return extremes().flagsSeen;
    },
    traceX: new Float32Array(tracePoints),
    traceY: new Float32Array(tracePoints),
    traceU: new Float32Array(tracePoints),
    traceV: new Float32Array(tracePoints),
  };
}

/** The block's latest values (they stay when the block is empty); its extremes come from the kernels when read. */
function summarise(summary: MutableSummary, out: AxisSamples, length: number, lostBefore: number, pipeline: AxisChain): void {
  summary.length = length;
  summary.lostBefore = lostBefore;
  summary.sampleIndex = pipeline.nextSampleIndex - 1;
  summary.countLost = pipeline.countLost;
  if (length === 0) return;
  summary.positionM = out.positionM[length - 1]!;
  summary.velocityMS = out.velocityMS[length - 1]!;
  summary.level = out.level[length - 1]!;
  summary.flags = out.flags[length - 1]!;
}

function finiteOrNaN(value: number): number {
  return Number.isFinite(value) ? value : Number.NaN;
}

/** One subscriber's view of one axis between its updates. */
function createAccumulator(name: string, maxEvents: number) {
  let sampleIndex = -1, samples = 0;
  let positionM = Number.NaN, velocityMS = Number.NaN, level = Number.NaN, flags = 0, countLost = false;
  let pMin = Infinity, pMax = -Infinity, vMin = Infinity, vMax = -Infinity, lMin = Infinity, seen = 0;
  let events: AlarmEvent[] = [];
  let modelEvents: ModelWatchEvent[] = [];
  let stale = false, staleSeen = false;
  let dropped = 0;
  return {
    /** Starts from the chain's current state: latest values, no samples or events of its own yet. */
    seed(s: AxisBlockSummary): void {
      sampleIndex = s.sampleIndex;
      countLost = s.countLost;
      positionM = pMin = pMax = s.positionM;
      velocityMS = vMin = vMax = s.velocityMS;
      level = lMin = s.level;
      flags = seen = s.flags;
      stale = staleSeen = s.calibrationStale;
    },
    merge(s: AxisBlockSummary): void {
      samples += s.length + s.lostBefore;
      sampleIndex = s.sampleIndex;
      countLost = s.countLost;
      if (s.length > 0) {
        positionM = s.positionM;
        velocityMS = s.velocityMS;
        level = s.level;
        flags = s.flags;
        if (s.positionMinM < pMin) pMin = s.positionMinM;
        if (s.positionMaxM > pMax) pMax = s.positionMaxM;
        if (s.velocityMinMS < vMin) vMin = s.velocityMinMS;
        if (s.velocityMaxMS > vMax) vMax = s.velocityMaxMS;
        if (s.levelMin < lMin) lMin = s.levelMin;
        seen |= s.flagsSeen;
      }
      for (const event of s.events) {
        if (events.length < maxEvents) events.push(event);
        else dropped++;
      }
      for (const event of s.modelEvents) {
        if (modelEvents.length < maxEvents) modelEvents.push(event);
        else dropped++;
        if (event.state === 'raised') staleSeen = true;
      }
      stale = s.calibrationStale;
      if (stale) staleSeen = true;
    },
    take(trace: AxisBlockSummary | null): AxisUpdate {
      const update: AxisUpdate = {
        name,
        sampleIndex,
        samples,
        positionM,
        positionMinM: finiteOrNaN(pMin),
        positionMaxM: finiteOrNaN(pMax),
        velocityMS,
        velocityMinMS: finiteOrNaN(vMin),
        velocityMaxMS: finiteOrNaN(vMax),
        level,
        levelMin: finiteOrNaN(lMin),
        flags,
        flagsSeen: seen,
        countLost,
        events,
        eventsDropped: dropped,
        calibrationStale: stale,
        calibrationStaleSeen: staleSeen,
        modelEvents,
        ...(trace === null ? {} : { trace: copyTrace(trace) }),
      };
      samples = 0;
      pMin = vMin = lMin = Infinity;
      pMax = vMax = -Infinity;
      seen = 0;
      events = [];
      modelEvents = [];
      staleSeen = stale;
      dropped = 0;
      return update;
    },
  };
}

function copyTrace(s: AxisBlockSummary): Trace {
  const capacity = s.traceX.length;
  const trace: Trace = { x: [], y: [], u: [], v: [] };
  const start = (s.traceNext - s.traceFilled + capacity) % Math.max(capacity, 1);
  for (let j = 0; j < s.traceFilled; j++) {
    const at = (start + j) % capacity;
    trace.x.push(s.traceX[at]!);
    trace.y.push(s.traceY[at]!);
    trace.u.push(s.traceU[at]!);
    trace.v.push(s.traceV[at]!);
  }
  return trace;
}
