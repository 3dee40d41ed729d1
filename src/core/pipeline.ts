// The whole signal chain over blocks: correction → monitor → phase tracker → displacement.

import type { AlarmEvent } from './alarms.js';
import { createCorrection, type Correction } from './correction.js';
import { createDisplacement, type Displacement, type PlaceKernel } from './displacement.js';
import type { EllipseCalibration } from './fit/ellipse.js';
import { createSignalMonitor, type AdcFormat, type SignalMonitor } from './monitor.js';
import { integerInRange, MAX_COUNT } from './options.js';
import { TWO_PI } from './phase.js';
import { createPhaseTracker, type PhaseTracker, type TrackKernel, type UnwrapMethod } from './tracker.js';

/** Raw sample blocks the pipeline accepts: ADC integers or floats. */
export type SampleArray = Int16Array | Uint16Array | Int32Array | Uint32Array | Float32Array | Float64Array;

export interface PipelineOptions {
  /** Sample rate in Hz. Required. */
  readonly rateHz: number;
  /** Vacuum wavelength in metres. Required. */
  readonly wavelengthM: number;
  /** Optical fold (2 single pass, 4 double-pass plane mirror, any positive number). Required. */
  readonly fold: number;
  /** Refractive index of air on the path. Default 1: the vacuum wavelength is used as is. */
  readonly refractiveIndex?: number;
  /** Factor on lengths and velocities, e.g. the normalisation to 20 °C. Default 1. */
  readonly lengthScale?: number;
  /** Ellipse correction. Default none (identity): the level is then the raw radius in input units. */
  readonly calibration?: EllipseCalibration | null;
  /** ADC format, for saturation. Default `{ kind: 'int16' }`. */
  readonly adc?: AdcFormat;
  /** Velocity loop natural frequency in Hz. Default rateHz/100. */
  readonly bandwidthHz?: number;
  /** Unwrapping: `plain` (default, steps under half a fringe) or `velocity-aided` (see `aidedAccelerationLimit`). */
  readonly unwrap?: UnwrapMethod;
  /** Low-signal threshold, also the level below which the phase is held. Default 0.3. */
  readonly lowSignalLevel?: number;
  /** Low-signal clear level. Default 0.4. */
  readonly lowSignalClearLevel?: number;
  /** Overspeed threshold in rad per sample. Default π/2 (a quarter fringe per sample, common practice margin). */
  readonly overspeedStepRad?: number;
  /** Step beyond which the count may be aliased, in rad per sample. Default 3π/4. */
  readonly countLostStepRad?: number;
  /** Unseen motion while the phase is held beyond which the count may be lost, rad. Default π/2. */
  readonly heldTravelRad?: number;
  /** Consecutive good samples before an alarm clears. Default 32. */
  readonly clearHoldSamples?: number;
  /** Initial size of the internal block buffers in samples; they grow once to the largest block seen. Default 4096. */
  readonly blockCapacity?: number;
  /**
   * Accelerated front end for quiet blocks (same results, or within its stated error). Here the default is none
   * (`null` too): the JavaScript stages only. The Node entry points' `createPipeline` (src/accel/pipeline.ts,
   * re-exported by the package root) defaults to the fastest exact one.
   */
  readonly frontEnd?: FrontEnd | null;
  /**
   * Accelerated tracker steady loop and displacement loop (same results to the bit), e.g. with a front end that
   * runs them along. Default none (`null` too): the JavaScript loops.
   */
  readonly kernel?: SteadyKernel | null;
}

/** The tracker's steady loop and the displacement loop, replaced together (see `TrackKernel`, `PlaceKernel`). */
export interface SteadyKernel extends TrackKernel, PlaceKernel {}

/**
 * An accelerated replacement of the correction, level and arctangent passes for blocks in which nothing needs
 * the monitor's alarm logic (e.g. a WebAssembly SIMD kernel). It computes level = √(u² + v²) and
 * phase = atan2(v, u) with u, v from `coefficients` (see `Correction`), either exactly as the JavaScript stages
 * do (`fastAtan2`) or within a stated error; a front end that is not exact must leave to the stages every block
 * where that error could change a decision (see `process`).
 */
export interface FrontEnd {
  /**
   * Writes the level of `length` samples into `level` and returns its own array holding their wrapped phases
   * (valid until its next call; the pipeline may overwrite it). Returns null (outputs then unspecified) when any
   * sample has a level below `minLevel`, a code at or beyond
   * `low`/`high`, or is not finite; and, unless its results are exactly the stages', when a level comes within
   * its error of `minLevel` or a phase step (wrapped difference of consecutive phases, the first from
   * `lastPhaseRad`) within its error of `stepGuardRad`.
   */
  process(
    x: SampleArray,
    y: SampleArray,
    length: number,
    coefficients: Float64Array,
    low: number,
    high: number,
    minLevel: number,
    level: Float32Array,
    lastPhaseRad: number,
    stepGuardRad: number,
  ): Float64Array | null;
}

/** Caller-owned output arrays, each at least as long as the input block. */
export interface PipelineOutput {
  /** Position in metres relative to the reference sample. */
  readonly positionM: Float64Array;
  /** Velocity in m/s. */
  readonly velocityMS: Float64Array;
  /** Normalised signal level (1 on the calibrated ellipse). */
  readonly level: Float32Array;
  /** Alarm bits (`AlarmBit`) active on each sample. */
  readonly flags: Uint8Array;
  /**
   * Optional: the unwrapped corrected phase, 2π·turns + phase (rad), for analysis tools. Being one double it
   * keeps about 1e-16 of its size: fine within a capture, not a substitute for the count at billions of fringes.
   */
  readonly unwrappedPhaseRad?: Float64Array;
}

export interface SpeedLimits {
  /** Unambiguous limit, half a fringe per sample: v_max = λ·f_s / (2·fold·n), m/s. */
  readonly unambiguousMS: number;
  /** Speed at which the overspeed alarm is raised, m/s. */
  readonly overspeedMS: number;
}

export interface Pipeline {
  /**
   * Processes `length` samples of x and y, writing the outputs and pushing alarm events (absolute sample
   * indices, in index order) onto `events`. Results are identical for any split of the same input into
   * blocks. Never throws on signal content; allocates only for alarm events and when a block is larger
   * than any seen before.
   */
  process(x: SampleArray, y: SampleArray, length: number, output: PipelineOutput, events: AlarmEvent[]): number;
  /** `lostSamples` samples were lost in transport before the next sample: input gap, count lost. */
  markGap(lostSamples: number): void;
  /**
   * Makes sample `atSampleIndex` (default: the next sample) the new zero of position and clears the
   * count-lost latch there. The index must not be in the past.
   */
  reReference(atSampleIndex?: number): void;
  setCalibration(calibration: EllipseCalibration | null): void;
  setRefractiveIndex(refractiveIndex: number): void;
  /** Back to the state after construction; options and calibration are kept. */
  reset(): void;
  /** Absolute index of the next sample (samples processed plus samples lost in gaps). */
  readonly nextSampleIndex: number;
  readonly speedLimits: SpeedLimits;
  readonly countLost: boolean;
  readonly stages: {
    readonly correction: Correction;
    readonly monitor: SignalMonitor;
    readonly tracker: PhaseTracker;
    readonly displacement: Displacement;
  };
}

export function createPipeline(options: PipelineOptions): Pipeline {
  // Each stage reads its own fields from the pipeline's options (the names are shared), which keeps the embedded
  // bundle free of four copies of the option list.
  const correction = createCorrection(options);
  const monitor = createSignalMonitor(options);
  const tracker = createPhaseTracker({ ...options, minLevel: monitor.options.lowSignalLevel });
  const displacement = createDisplacement(options);
  let capacity = 0;
  let u = new Float64Array(0);
  let v = u;
  // The tracker's outputs, one record for every block: only `flags` changes (the caller's array).
  const track: { turns: Float64Array; phaseRad: Float64Array; stepRad: Float64Array; flags: Uint8Array } = {
    turns: u,
    phaseRad: u,
    stepRad: u,
    flags: new Uint8Array(0),
  };
  let nextIndex = 0;
  let referenceIndex = -1; // pending re-reference, or −1

  function allocate(length: number): void {
    const make = () => new Float64Array(length);
    capacity = length;
    u = make();
    v = make();
    track.turns = make();
    track.phaseRad = make();
    track.stepRad = make();
  }
  allocate(integerInRange('blockCapacity', options.blockCapacity ?? 4096, 1, 2 ** 28));

  const frontEnd = options.frontEnd;
  const { low, high } = monitor.limits;
  const minLevel = monitor.options.lowSignalLevel;
  // The least step size at which a plain tracker decides anything (the overspeed alarm's clear level, below its
  // raise level and the count-lost step). Velocity-aided decisions turn on the loop's prediction, not on the
  // step alone, so there no step is safe: an inexact front end declines every block.
  const stepGuardRad = tracker.options.unwrap === 'plain' ? 0.9 * tracker.options.overspeedStepRad : 0;

  function run(x: SampleArray, y: SampleArray, length: number, output: PipelineOutput, events: AlarmEvent[]): void {
    const firstEvent = events.length;
    const { turns, phaseRad, stepRad } = track;
    output.flags.fill(0, 0, length);
    track.flags = output.flags;
    const phases =
      frontEnd && monitor.quiet
        ? frontEnd.process(x, y, length, correction.coefficients, low, high, minLevel, output.level, tracker.phaseRad, stepGuardRad)
        : null;
    if (phases !== null) {
      track.phaseRad = phases; // the front end's own array, for this block only
      tracker.processPhase(output.level, length, nextIndex, track, events);
      track.phaseRad = phaseRad;
    } else {
      correction.process(x, y, u, v, length);
      monitor.process(x, y, u, v, length, nextIndex, output.level, output.flags, events);
      tracker.process(u, v, output.level, length, nextIndex, track, events);
    }
    displacement.process(turns, phases ?? phaseRad, stepRad, length, output.positionM, output.velocityMS, output.unwrappedPhaseRad);
    nextIndex += length;
    if (events.length - firstEvent > 1) {
      const added = events.splice(firstEvent);
      added.sort((a, b) => a.sampleIndex - b.sampleIndex);
      for (const event of added) events.push(event);
    }
  }

  function process(x: SampleArray, y: SampleArray, length: number, output: PipelineOutput, events: AlarmEvent[]): number {
    if (length > capacity) allocate(length);
    let done = 0;
    while (done < length) {
      if (referenceIndex === nextIndex) {
        referenceIndex = -1;
        displacement.referenceAtNext();
        tracker.clearCountLostAtNext();
      }
      let chunk = length - done;
      if (referenceIndex > nextIndex && referenceIndex < nextIndex + chunk) chunk = referenceIndex - nextIndex;
      if (done === 0 && chunk === length) {
        run(x, y, length, output, events);
      } else {
        // A pending re-reference splits the block; the views cost an allocation only then.
        const end = done + chunk;
        run(x.subarray(done, end), y.subarray(done, end), chunk, {
          positionM: output.positionM.subarray(done, end),
          velocityMS: output.velocityMS.subarray(done, end),
          level: output.level.subarray(done, end),
          flags: output.flags.subarray(done, end),
          unwrappedPhaseRad: output.unwrappedPhaseRad?.subarray(done, end),
        }, events);
      }
      done += chunk;
    }
    return length;
  }

  return {
    process,
    markGap(lostSamples: number) {
      tracker.markGap(lostSamples);
      nextIndex += lostSamples;
    },
    reReference(atSampleIndex = nextIndex) {
      integerInRange('atSampleIndex', atSampleIndex, nextIndex, MAX_COUNT);
      referenceIndex = atSampleIndex;
    },
    setCalibration: (calibration) => correction.setCalibration(calibration),
    setRefractiveIndex: (refractiveIndex) => displacement.setRefractiveIndex(refractiveIndex),
    reset() {
      monitor.reset();
      tracker.reset();
      displacement.reset();
      nextIndex = 0;
      referenceIndex = -1;
    },
    get nextSampleIndex() {
      return nextIndex;
    },
    get speedLimits(): SpeedLimits {
      const perFringe = displacement.metresPerFringe;
      return {
        unambiguousMS: (perFringe * options.rateHz) / 2,
        overspeedMS: (tracker.options.overspeedStepRad / TWO_PI) * perFringe * options.rateHz,
      };
    },
    get countLost() {
      return tracker.countLost;
    },
    stages: { correction, monitor, tracker, displacement },
  };
}
