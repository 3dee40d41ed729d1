// Phase tracker: arctangent phase, unwrapping into an integer fringe count plus a fractional phase, a
// second-order tracking loop for velocity, the overspeed alarm and the count-integrity latch.
//
// The count is kept as whole turns (an integer-valued double, exact to 2^53 fringes) beside the wrapped phase,
// so the fraction keeps its full precision however many fringes have passed. The unwrap takes the step
// closest to a prediction of the next step: the plain unwrapper predicts zero (so each step must stay under
// half a fringe); the velocity-aided unwrapper predicts the loop's own next step, so what must stay under half
// a fringe is the prediction error, not the motion. Both give the same outputs and alarms otherwise.

import { AlarmBit, pushAlarm, type AlarmEvent } from './alarms.js';
import { integerInRange, MAX_COUNT, numberInRange, oneOf, positiveFinite } from './options.js';
import { fastAtan2, TWO_PI } from './phase.js';

export type UnwrapMethod = 'plain' | 'velocity-aided';

export interface PhaseTrackerOptions {
  /** Sample rate in Hz (needed to turn the loop bandwidth into gains). Required. */
  readonly rateHz: number;
  /**
   * `plain` (default): steps must stay under half a fringe per sample. `velocity-aided`: steps up to 0.9
   * fringe per sample, provided the phase acceleration stays within `aidedAccelerationLimit` (see there).
   */
  readonly unwrap?: UnwrapMethod;
  /** Natural frequency of the velocity loop in Hz (critically damped, ζ = 1/√2). Default rateHz/100; range (0, rateHz/10]. */
  readonly bandwidthHz?: number;
  /** Samples whose level is below this (or NaN) do not move the phase: it is held. Default 0.3; range (0, 1). */
  readonly minLevel?: number;
  /**
   * Overspeed alarm when a phase step exceeds this, in rad per sample. Plain: default π/2, a quarter fringe
   * per sample, half the unambiguous limit of π (common practice design margin), range (0, countLostStepRad).
   * Velocity-aided: default 1.6π (0.8 fringe per sample), range (0, 1.8π).
   */
  readonly overspeedStepRad?: number;
  /**
   * A step this far from its prediction (plain: from zero) may already be aliased by a whole fringe: the
   * count-lost latch is set. Default 3π/4; range (0, π) (plain: also above overspeedStepRad).
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
  /**
   * The same as `process` for a block whose wrapped phases (atan2(v, u), as `fastAtan2` gives them) are
   * already in `output.phaseRad`, e.g. from an accelerated front end.
   */
  processPhase(level: Float32Array, length: number, firstIndex: number, output: PhaseTrackerOutput, events: AlarmEvent[]): number;
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
 * Unwraps a block whose samples are all usable into turns and loop velocities, with the loop state [w, lag] in
 * `loop`, and says whether every step stayed within `maxStepRad`; false (outputs then unspecified, `loop`
 * untouched) when a sample is held or a step is larger.
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
  alpha: number,
  beta: number,
  loop: Float64Array,
): boolean {
  const pi = Math.PI, twoPi = TWO_PI;
  let last = lastPhase;
  let turnsNow = turns;
  let w = loop[0]!;
  let lag = loop[1]!;
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
    // The velocity loop, in the same arithmetic as the full loop of `process`.
    const residual = d - lag - w;
    w += beta * residual;
    lag = (alpha - 1) * residual;
    stepOut[i] = w;
  }
  loop[0] = w;
  loop[1] = lag;
  return true;
}

/** Velocity-aided steps beyond 0.9 fringe per sample come too close to the fringe-per-sample alias: count lost. */
const AIDED_MAX_STEP_RAD = 1.8 * Math.PI;

/** Loop gains of the tracker: alpha-beta form of a critically damped (ζ = 1/√2) type-2 loop. */
function loopGains(rateHz: number, bandwidthHz: number): { alpha: number; beta: number } {
  const omegaT = (TWO_PI * bandwidthHz) / rateHz;
  return { alpha: Math.SQRT2 * omegaT, beta: omegaT * omegaT };
}

/**
 * The phase acceleration (rad per sample²) under which velocity-aided unwrapping keeps an exact count: half the
 * loop's slip limit. At constant acceleration A the loop's prediction lags by A·(1 − α)/β; it slips a fringe
 * when that reaches π. The factor 2 leaves room for the transient overshoot when the acceleration changes and
 * for phase noise of up to about 0.01 rad (a few tenths of a percent of the radius). In m/s²: multiply by
 * rateHz² · λ / (2π · fold · n).
 */
export function aidedAccelerationLimit(rateHz: number, bandwidthHz: number = rateHz / 100): number {
  const { alpha, beta } = loopGains(positiveFinite('rateHz', rateHz), positiveFinite('bandwidthHz', bandwidthHz));
  return (Math.PI * beta) / (2 * (1 - alpha));
}

export function createPhaseTracker(options: PhaseTrackerOptions): PhaseTracker {
  const rateHz = positiveFinite('rateHz', options.rateHz);
  const bandwidthHz = numberInRange('bandwidthHz', options.bandwidthHz ?? rateHz / 100, 0, rateHz / 10, true);
  const minLevel = numberInRange('minLevel', options.minLevel ?? 0.3, 0, 1, true);
  const unwrap = oneOf('unwrap', options.unwrap ?? 'plain', ['plain', 'velocity-aided'] as const);
  const aided = unwrap === 'velocity-aided';
  const countLostStepRad = numberInRange('countLostStepRad', options.countLostStepRad ?? (3 * Math.PI) / 4, 0, Math.PI, true);
  const overspeedStepRad = aided
    ? numberInRange('overspeedStepRad', options.overspeedStepRad ?? 1.6 * Math.PI, 0, AIDED_MAX_STEP_RAD, true)
    : numberInRange('overspeedStepRad', options.overspeedStepRad ?? Math.PI / 2, 0, countLostStepRad, true);
  const heldTravelRad = numberInRange('heldTravelRad', options.heldTravelRad ?? Math.PI / 2, 0, Math.PI, true);
  const clearHoldSamples = integerInRange('clearHoldSamples', options.clearHoldSamples ?? 32, 1, 2 ** 31);
  const resolved = Object.freeze({ rateHz, unwrap, bandwidthHz, minLevel, overspeedStepRad, countLostStepRad, heldTravelRad, clearHoldSamples });

  // Alpha-beta form of a type-2 loop: zero steady-state error at constant velocity.
  const { alpha, beta } = loopGains(rateHz, bandwidthHz);

  let started = false;
  let turns = 0;
  let lastPhase = 0;
  let step = 0; // loop velocity, rad/sample
  let lag = 0; // loop phase estimate minus last measured phase, rad
  let heldTravel = 0;
  let resuming = false; // the next usable sample follows held ones
  const loopState = new Float64Array(2); // [w, lag] handed to the fast path
  let countLost = false;
  let clearPending = false;
  let overspeedActive = false;
  let overspeedRun = 0;
  let gapPendingSamples = 0;
  let gapActive = false;

  function process(
    u: Float64Array,
    v: Float64Array,
    level: Float32Array,
    length: number,
    firstIndex: number,
    output: PhaseTrackerOutput,
    events: AlarmEvent[],
  ): number {
    const phaseOut = output.phaseRad;
    // The arctangent pass first: a short loop with no carried state, which V8 keeps tight.
    for (let i = 0; i < length; i++) phaseOut[i] = fastAtan2(v[i]!, u[i]!);
    return processPhase(level, length, firstIndex, output, events);
  }

  function processPhase(level: Float32Array, length: number, firstIndex: number, output: PhaseTrackerOutput, events: AlarmEvent[]): number {
    if (length <= 0) return 0;
    const { turns: turnsOut, phaseRad: phaseOut, stepRad: stepOut, flags } = output;
    // Gaps and latch clearing are requested between blocks, so they fall on the block's first sample.
    let firstBits = 0;
    if (clearPending) {
      clearPending = false;
      if (countLost) {
        countLost = false;
        pushAlarm(events, firstIndex, 'countLost', false, NaN);
      }
    }
    if (gapActive) {
      gapActive = false;
      pushAlarm(events, firstIndex, 'inputGap', false, NaN);
    }
    if (gapPendingSamples > 0) {
      firstBits = AlarmBit.inputGap;
      pushAlarm(events, firstIndex, 'inputGap', true, gapPendingSamples);
      if (!countLost) {
        countLost = true;
        pushAlarm(events, firstIndex, 'countLost', true, gapPendingSamples);
      }
      gapPendingSamples = 0;
      // The step across the gap spans unseen samples and says nothing of speed (no overspeed): re-acquire the
      // phase there, as after held samples.
      resuming = started;
      if (length > 1) pushAlarm(events, firstIndex + 1, 'inputGap', false, NaN);
      else gapActive = true;
    }

    // State in locals for the loop: V8 keeps them in registers rather than in the closure's context.
    const a = alpha, b = beta, minLev = minLevel, lostStep = countLostStepRad, overStep = overspeedStepRad;
    const overClear = 0.9 * overspeedStepRad, hold = clearHoldSamples, travelLimit = heldTravelRad;
    const pi = Math.PI, twoPi = TWO_PI, overspeedBit = 8, countLostBit = 32; // AlarmBit.overspeed, AlarmBit.countLost
    const maxStep = aided ? AIDED_MAX_STEP_RAD : Infinity;
    let turnsNow = turns, last = lastPhase, w = step, lagNow = lag, travel = heldTravel, resume = resuming;
    let lost = countLost, over = overspeedActive, overRun = overspeedRun, isStarted = started;
    loopState[0] = w;
    loopState[1] = lagNow;
    if (!aided && isStarted && !resume && !over && steadyBlock(phaseOut, level, length, minLev, overStep, last, turnsNow, turnsOut, stepOut, a, b, loopState)) {
      // Fast path: every sample usable and every step under the overspeed threshold, so no alarm can change.
      w = loopState[0]!;
      lagNow = loopState[1]!;
      if (lost) for (let i = 0; i < length; i++) flags[i] |= countLostBit;
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
        let miss: number; // distance of the step from its prediction
        if (aided) {
          const predicted = lagNow + w;
          const wraps = Math.round((d - predicted) / twoPi);
          d -= wraps * twoPi;
          turnsNow -= wraps;
          miss = d - predicted;
        } else {
          if (d > pi) {
            d -= twoPi;
            turnsNow -= 1;
          } else if (d <= -pi) {
            d += twoPi;
            turnsNow += 1;
          }
          miss = d;
        }
        last = theta;
        const absStep = d < 0 ? -d : d;
        const absMiss = miss < 0 ? -miss : miss;
        if ((absMiss > lostStep || absStep > maxStep) && !lost) {
          lost = true;
          pushAlarm(events, firstIndex + i, 'countLost', true, absMiss > lostStep ? absMiss : absStep);
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
              pushAlarm(events, firstIndex + i, 'overspeed', true, absStep);
            }
          } else if (over && absStep < overClear && ++overRun >= hold) {
            over = false;
            pushAlarm(events, firstIndex + i, 'overspeed', false, absStep);
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
          pushAlarm(events, firstIndex + i, 'countLost', true, lev !== lev ? NaN : travel);
        }
      }
      turnsOut[i] = turnsNow;
      phaseOut[i] = last;
      stepOut[i] = w;
      flags[i] |= (over ? overspeedBit : 0) | (lost ? countLostBit : 0);
    }
    flags[0] |= firstBits;
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
    processPhase,
    markGap(lostSamples: number) {
      integerInRange('lostSamples', lostSamples, 1, MAX_COUNT);
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
