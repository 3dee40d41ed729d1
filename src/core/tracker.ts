// Phase tracker: arctangent phase, unwrapping into an integer fringe count plus a fractional phase, a
// second-order tracking loop for velocity, the overspeed alarm and the count-integrity latch.
//
// The count is kept as whole turns (an integer-valued double, exact to 2^53 fringes) beside the wrapped phase,
// so the fraction keeps its full precision however many fringes have passed. The unwrap takes the step
// closest to the loop's prediction of the next step; the plain unwrapper used here predicts zero, and a
// velocity-aided unwrapper only changes that prediction, not the outputs or the pipeline around it.

import { AlarmBit, type AlarmEvent, type AlarmKind } from './alarms.js';
import { integerInRange, numberInRange, positiveFinite } from './options.js';
import { fastAtan2, TWO_PI } from './phase.js';

export interface PhaseTrackerOptions {
  /** Sample rate in Hz (needed to turn the loop bandwidth into gains). Required. */
  readonly rateHz: number;
  /** Natural frequency of the velocity loop in Hz (critically damped, ζ = 1/√2). Default rateHz/100; range (0, rateHz/10]. */
  readonly bandwidthHz?: number;
  /** Samples whose level is below this (or NaN) do not move the phase: it is held. Default 0.3; range (0, 1). */
  readonly minLevel?: number;
  /**
   * Overspeed alarm when a phase step exceeds this, in rad per sample. Default π/2, a quarter fringe per
   * sample: half the unambiguous limit of π (common practice design margin). Range (0, countLostStepRad).
   */
  readonly overspeedStepRad?: number;
  /**
   * A step this large may already be an aliased step of more than π: the count-lost latch is set.
   * Default 3π/4; range (overspeedStepRad, π).
   */
  readonly countLostStepRad?: number;
  /**
   * While the phase is held, the loop's speed times the held time is the motion that went unseen; past this
   * (rad) a fringe may have been missed and the count-lost latch is set. Default π/2; range (0, π).
   */
  readonly heldTravelRad?: number;
  /** The overspeed alarm clears after this many consecutive steps under 0.9 × overspeedStepRad. Default 32. */
  readonly clearHoldSamples?: number;
}

export interface PhaseTrackerOutput {
  /** Whole turns (integer-valued). Position in fringes is turns + phaseRad/2π. */
  readonly turns: Float64Array;
  /** Wrapped phase in (−π, π]. */
  readonly phaseRad: Float64Array;
  /** Loop velocity estimate in rad per sample. */
  readonly stepRad: Float64Array;
  /** Alarm bits; this stage ORs in overspeed, input gap and count lost. */
  readonly flags: Uint8Array;
}

export interface PhaseTracker {
  process(
    u: Float64Array,
    v: Float64Array,
    level: Float32Array,
    length: number,
    firstIndex: number,
    output: PhaseTrackerOutput,
    events: AlarmEvent[],
  ): number;
  /** Samples were lost before the next sample: it carries the input-gap alarm and sets the count-lost latch. */
  markGap(lostSamples: number): void;
  /** Clears the count-lost latch at the next sample (the caller re-references the position there). */
  clearCountLostAtNext(): void;
  reset(): void;
  readonly countLost: boolean;
  readonly turns: number;
  readonly phaseRad: number;
  readonly stepRad: number;
  readonly options: Readonly<Required<PhaseTrackerOptions>>;
}

/**
 * Unwraps a block whose samples are all usable into turns and steps, and says whether every step stayed within
 * `maxStepRad`; false (outputs then unspecified) when a sample is held or a step is larger.
 */
function steadyBlock(
  phaseRad: Float64Array,
  level: Float32Array,
  length: number,
  minLevel: number,
  maxStepRad: number,
  lastPhase: number,
  turns: number,
  turnsOut: Float64Array,
  stepOut: Float64Array,
): boolean {
  const pi = Math.PI, twoPi = TWO_PI;
  let last = lastPhase;
  let turnsNow = turns;
  for (let i = 0; i < length; i++) {
    if (!(level[i]! >= minLevel)) return false;
    const theta = phaseRad[i]!;
    let d = theta - last;
    if (d > pi) {
      d -= twoPi;
      turnsNow -= 1;
    } else if (d <= -pi) {
      d += twoPi;
      turnsNow += 1;
    }
    if (d > maxStepRad || d < -maxStepRad) return false;
    last = theta;
    turnsOut[i] = turnsNow;
    stepOut[i] = d;
  }
  return true;
}

export function createPhaseTracker(options: PhaseTrackerOptions): PhaseTracker {
  const rateHz = positiveFinite('rateHz', options.rateHz);
  const bandwidthHz = numberInRange('bandwidthHz', options.bandwidthHz ?? rateHz / 100, 0, rateHz / 10, true);
  const minLevel = numberInRange('minLevel', options.minLevel ?? 0.3, 0, 1, true);
  const countLostStepRad = numberInRange('countLostStepRad', options.countLostStepRad ?? (3 * Math.PI) / 4, 0, Math.PI, true);
  const overspeedStepRad = numberInRange('overspeedStepRad', options.overspeedStepRad ?? Math.PI / 2, 0, countLostStepRad, true);
  const heldTravelRad = numberInRange('heldTravelRad', options.heldTravelRad ?? Math.PI / 2, 0, Math.PI, true);
  const clearHoldSamples = integerInRange('clearHoldSamples', options.clearHoldSamples ?? 32, 1, 2 ** 31);
  const resolved = Object.freeze({ rateHz, bandwidthHz, minLevel, overspeedStepRad, countLostStepRad, heldTravelRad, clearHoldSamples });

  // Alpha-beta form of a type-2 loop: zero steady-state error at constant velocity.
  const omegaT = (TWO_PI * bandwidthHz) / rateHz;
  const alpha = Math.SQRT2 * omegaT;
  const beta = omegaT * omegaT;

  let started = false;
  let turns = 0;
  let lastPhase = 0;
  let step = 0; // loop velocity, rad/sample
  let lag = 0; // loop phase estimate minus last measured phase, rad
  let heldTravel = 0;
  let resuming = false; // the next usable sample follows held ones
  let countLost = false;
  let clearPending = false;
  let overspeedActive = false;
  let overspeedRun = 0;
  let gapPendingSamples = 0;
  let gapActive = false;

  function event(events: AlarmEvent[], sampleIndex: number, kind: AlarmKind, raised: boolean, value: number): void {
    events.push({ sampleIndex, kind, state: raised ? 'raised' : 'cleared', value });
  }

  function process(
    u: Float64Array,
    v: Float64Array,
    level: Float32Array,
    length: number,
    firstIndex: number,
    output: PhaseTrackerOutput,
    events: AlarmEvent[],
  ): number {
    if (length <= 0) return 0;
    const { turns: turnsOut, phaseRad: phaseOut, stepRad: stepOut, flags } = output;
    // Gaps and latch clearing are requested between blocks, so they fall on the block's first sample.
    let firstBits = 0;
    if (clearPending) {
      clearPending = false;
      if (countLost) {
        countLost = false;
        event(events, firstIndex, 'countLost', false, Number.NaN);
      }
    }
    if (gapActive) {
      gapActive = false;
      event(events, firstIndex, 'inputGap', false, Number.NaN);
    }
    if (gapPendingSamples > 0) {
      firstBits = AlarmBit.inputGap;
      event(events, firstIndex, 'inputGap', true, gapPendingSamples);
      if (!countLost) {
        countLost = true;
        event(events, firstIndex, 'countLost', true, gapPendingSamples);
      }
      gapPendingSamples = 0;
      if (length > 1) event(events, firstIndex + 1, 'inputGap', false, Number.NaN);
      else gapActive = true;
    }

    // State in locals for the loop: V8 keeps them in registers rather than in the closure's context.
    const a = alpha, b = beta, minLev = minLevel, lostStep = countLostStepRad, overStep = overspeedStepRad;
    const overClear = 0.9 * overspeedStepRad, hold = clearHoldSamples, travelLimit = heldTravelRad;
    const pi = Math.PI, twoPi = TWO_PI, overspeedBit = 8, countLostBit = 32; // AlarmBit.overspeed, AlarmBit.countLost
    let turnsNow = turns, last = lastPhase, w = step, lagNow = lag, travel = heldTravel, resume = resuming;
    let lost = countLost, over = overspeedActive, overRun = overspeedRun, isStarted = started;
    // The arctangent pass first: a short loop with no carried state, which V8 keeps tight.
    for (let i = 0; i < length; i++) phaseOut[i] = fastAtan2(v[i]!, u[i]!);
    if (isStarted && !resume && !over && steadyBlock(phaseOut, level, length, minLev, overStep, last, turnsNow, turnsOut, stepOut)) {
      // Fast path: every sample usable and every step under the overspeed threshold, so no alarm can change;
      // stepOut holds the unwrapped steps. The same arithmetic as the full loop below, in shorter loops.
      for (let i = 0; i < length; i++) {
        const residual = stepOut[i]! - lagNow - w;
        w += b * residual;
        lagNow = (a - 1) * residual;
        stepOut[i] = w;
      }
      if (lost) for (let i = 0; i < length; i++) flags[i] = flags[i]! | countLostBit;
      turnsNow = turnsOut[length - 1]!;
      last = phaseOut[length - 1]!;
    } else for (let i = 0; i < length; i++) {
      const lev = level[i]!;
      if (lev >= minLev) {
        const theta = phaseOut[i]!;
        if (!isStarted) {
          isStarted = true;
          last = theta;
        }
        let d = theta - last;
        if (d > pi) {
          d -= twoPi;
          turnsNow -= 1;
        } else if (d <= -pi) {
          d += twoPi;
          turnsNow += 1;
        }
        last = theta;
        const absStep = d < 0 ? -d : d;
        if (absStep > lostStep && !lost) {
          lost = true;
          event(events, firstIndex + i, 'countLost', true, absStep);
        }
        if (resume) {
          // The step across a hold spans many samples and says nothing of speed: re-acquire the phase and
          // keep the velocity the loop had.
          resume = false;
          travel = 0;
          lagNow = 0;
        } else {
          if (absStep > overStep) {
            overRun = 0;
            if (!over) {
              over = true;
              event(events, firstIndex + i, 'overspeed', true, absStep);
            }
          } else if (over && absStep < overClear && ++overRun >= hold) {
            over = false;
            event(events, firstIndex + i, 'overspeed', false, absStep);
          }
          const residual = d - lagNow - w;
          w += b * residual;
          lagNow = (a - 1) * residual;
        }
      } else {
        // Held: the phase is unusable (low or non-finite signal). Motion the loop expects goes unseen.
        travel += w < 0 ? -w : w;
        resume = isStarted;
        if (!lost && (lev !== lev || travel > travelLimit)) {
          lost = true;
          event(events, firstIndex + i, 'countLost', true, lev !== lev ? Number.NaN : travel);
        }
      }
      turnsOut[i] = turnsNow;
      phaseOut[i] = last;
      stepOut[i] = w;
      flags[i] = flags[i]! | (over ? overspeedBit : 0) | (lost ? countLostBit : 0);
    }
    flags[0] = flags[0]! | firstBits;
    turns = turnsNow;
    lastPhase = last;
    step = w;
    lag = lagNow;
    heldTravel = travel;
    resuming = resume;
    countLost = lost;
    overspeedActive = over;
    overspeedRun = overRun;
    started = isStarted;
    return length;
  }

  function reset(): void {
    started = false;
    turns = 0;
    lastPhase = 0;
    step = 0;
    lag = 0;
    heldTravel = 0;
    resuming = false;
    countLost = false;
    clearPending = false;
    overspeedActive = false;
    overspeedRun = 0;
    gapPendingSamples = 0;
    gapActive = false;
  }

  reset();
  return {
    process,
    markGap(lostSamples: number) {
      integerInRange('lostSamples', lostSamples, 1, Number.MAX_SAFE_INTEGER);
      gapPendingSamples += lostSamples;
    },
    clearCountLostAtNext() {
      clearPending = true;
    },
    reset,
    get countLost() {
      return countLost;
    },
    get turns() {
      return turns;
    },
    get phaseRad() {
      return lastPhase;
    },
    get stepRad() {
      return step;
    },
    options: resolved,
  };
}
