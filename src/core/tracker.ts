// Phase tracker: arctangent phase, unwrapping into an integer fringe count plus a fractional phase, a
// second-order tracking loop for velocity, the overspeed alarm and the count-integrity latch.
//
// The count is kept as whole turns (an integer-valued double, exact to 2^53 fringes) beside the wrapped phase,
// so the fraction keeps its full precision however many fringes have passed. The unwrap takes the step
// closest to a prediction of the next step: the plain unwrapper predicts zero (so each step must stay under
// half a fringe); the velocity-aided unwrapper predicts the last measured step once that exceeds an eighth of
// a fringe, so what must stay under half a fringe is the change of step, not the motion. (It predicted the
// loop's next step before; the loop lags any acceleration, and with its default bandwidth it slipped hundreds
// of fringes on motion the plain rule counts exactly.) Both give the same outputs and alarms otherwise.

import { AlarmBit, pushAlarm, type AlarmEvent } from './alarms.js';
import { integerInRange, MAX_COUNT, numberInRange, oneOf, positiveFinite } from './options.js';
import { fastAtan2, TWO_PI } from './phase.js';

export type UnwrapMethod = 'plain' | 'velocity-aided';

export interface PhaseTrackerOptions {
  /** Sample rate in Hz (needed to turn the loop bandwidth into gains). Required. */
  readonly rateHz: number;
  /**
   * `plain` (default): steps must stay under half a fringe per sample. `velocity-aided`: steps up to 0.9
   * fringe per sample, provided the step changes by less than `aidedAccelerationLimit()` per sample (see there);
   * below an eighth of a fringe per sample it is the plain rule.
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
  /** Accelerated steady loop (same results to the bit, e.g. WebAssembly). Default none: the JavaScript loop. */
  readonly kernel?: TrackKernel | null;
}

/**
 * A replacement of the tracker's steady loop: for a block whose samples are all usable, the same turns, loop
 * velocities and loop state [w, lag, noise, recent step] as the JavaScript loop, to the bit; false (outputs then
 * unspecified, `loop` untouched) when a level is below `minLevel` or a step beyond `maxStepRad`.
 */
export interface TrackKernel {
  track(
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
  ): boolean;
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
  readonly options: Readonly<Required<Omit<PhaseTrackerOptions, 'kernel'>>>;
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
  const pi = Math.PI, twoPi = TWO_PI, toResidual = 1 / (alpha - 1);
  // `- 0` (an identity) types them as numbers: from closure variables they stayed boxed, a heap number a sample.
  let last = lastPhase - 0;
  let turnsNow = turns - 0;
  let w = loop[0]!;
  let lag = loop[1]!;
  let noise = loop[2]!;
  let recent = loop[3]!;
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
    const change = residual - lag * toResidual;
    noise += alpha * ((change < 0 ? -change : change) - noise);
    recent += (d - recent) / 4;
    w += beta * residual;
    lag = (alpha - 1) * residual;
    stepOut[i] = w;
  }
  loop[0] = w;
  loop[1] = lag;
  loop[2] = noise;
  loop[3] = recent;
  return true;
}

/** Velocity-aided steps beyond 0.9 fringe per sample come too close to the fringe-per-sample alias: count lost. */
const AIDED_MAX_STEP_RAD = 1.8 * Math.PI;
/** Velocity-aided unwrapping predicts the last step once it exceeds an eighth of a fringe per sample (see below). */
const AIDED_FROM_STEP_RAD = Math.PI / 4;

/** The speed nearest `speed` within `band` of |estimate| (all in rad per sample). */
function nearest(speed: number, estimate: number, band: number): number {
  const magnitude = estimate < 0 ? -estimate : estimate;
  return Math.min(Math.max(speed, magnitude - band), magnitude + band);
}

/** Loop gains of the tracker: alpha-beta form of a critically damped (ζ = 1/√2) type-2 loop. */
function loopGains(rateHz: number, bandwidthHz: number): { alpha: number; beta: number } {
  const omegaT = (TWO_PI * bandwidthHz) / rateHz;
  return { alpha: Math.SQRT2 * omegaT, beta: omegaT * omegaT };
}

/**
 * The change of step per sample (phase acceleration, rad per sample²) under which velocity-aided unwrapping keeps
 * an exact count without alarm: 3π/8. The prediction is the last measured step (the plain rule's zero below an
 * eighth of a fringe per sample), so a step is aliased only when the step changes by π in one sample; count lost
 * is raised from 3π/4. The bound leaves π/8 for phase noise (the second difference of white phase noise σ has
 * σ√6) and for the switch between the two predictions, and does not depend on the sample rate or the loop.
 * In m/s²: multiply by rateHz² · λ / (2π · fold · n), i.e. 3·λ·rateHz² / (16 · fold · n).
 */
export function aidedAccelerationLimit(): number {
  return (3 * Math.PI) / 8;
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
  const steady = options.kernel?.track ?? steadyBlock;

  let started = false;
  let resuming = false; // the next usable sample follows held ones
  // The state kept as doubles, in a typed array: a double let written back after each block costs a heap number.
  // [0..3]: loop velocity w (rad/sample), lag (loop phase estimate minus last measured phase, rad), noise (mean
  // |change of the loop residual| between samples, rad: the phase noise the loop sees), recent step (mean of the last
  // few steps, gain 1/4, rad/sample), handed to the fast path as its loop state; then turns, last phase, held travel
  // (rad) and the last one-sample step (rad, the velocity-aided prediction).
  const state = new Float64Array(8);
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
    const pi = Math.PI, twoPi = TWO_PI; // 8 and 32 below: AlarmBit.overspeed, AlarmBit.countLost
    const maxStep = aided ? AIDED_MAX_STEP_RAD : Infinity;
    const toResidual = 1 / (a - 1), compensated = a - b / 2;
    let turnsNow = state[4]!, last = state[5]!, w = state[0]!, lagNow = state[1]!, travel = state[6]!, resume = resuming;
    let lost = countLost, over = overspeedActive, overRun = overspeedRun, isStarted = started, prevStep = state[7]!, noiseNow = state[2]!, recent = state[3]!;
    if (!aided && isStarted && !resume && !over && steady(phaseOut, level, length, minLev, overStep, last, turnsNow, turnsOut, stepOut, a, b, state)) {
      // Fast path: every sample usable and every step under the overspeed threshold, so no alarm can change.
      w = state[0]!;
      lagNow = state[1]!;
      noiseNow = state[2]!;
      recent = state[3]!;
      if (lost) for (let i = 0; i < length; i++) flags[i] |= 32;
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
          // The last measured step predicts the next (no loop lag, so any real acceleration is followed) once the
          // motion exceeds an eighth of a fringe per sample; slower, the prediction is zero: the plain rule.
          const predicted = prevStep > AIDED_FROM_STEP_RAD || prevStep < -AIDED_FROM_STEP_RAD ? prevStep : 0;
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
          // keep the velocity the loop had. A step beyond the travel allowed for (what was added up while held,
          // one more sample, and the held-travel limit) shows that the stage moved faster while unseen than
          // assumed, so whole fringes may be missing from it too.
          if (absStep > travelLimit + travel + (w < 0 ? -w : w) && !lost) {
            lost = true;
            pushAlarm(events, firstIndex + i, 'countLost', true, absStep);
          }
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
          prevStep = d;
          const residual = d - lagNow - w;
          const change = residual - lagNow * toResidual;
          noiseNow += a * ((change < 0 ? -change : change) - noiseNow);
          recent += (d - recent) / 4;
          w += b * residual;
          lagNow = (a - 1) * residual;
        }
      } else {
        // Held: the phase is unusable (low or non-finite signal); the motion goes unseen at the speed it had.
        // The loop's velocity lags a change of speed: after a stop it still shows motion, as the stage sets off
        // it shows too little. Two estimates with less lag but more noise correct it: the loop's velocity plus
        // the lag its last residual r implies under constant acceleration, (α − β/2)·r, and the mean of the
        // last few steps. Each keeps the loop's speed where that lies within 3× the estimate's noise of it, else
        // the band's nearer edge. Both above the loop's speed (setting off): the larger; else the smaller, which
        // is never above the loop's speed (figures: docs/signal-chain.md).
        const absW = w < 0 ? -w : w;
        const byLag = nearest(absW, w + compensated * lagNow * toResidual, 3 * compensated * noiseNow);
        const byRecent = nearest(absW, recent, 0.41 * noiseNow);
        const lower = byLag < byRecent ? byLag : byRecent;
        travel += lower > absW ? byLag + byRecent - lower : lower;
        resume = isStarted;
        if (!lost && (lev !== lev || travel > travelLimit)) {
          lost = true;
          pushAlarm(events, firstIndex + i, 'countLost', true, lev !== lev ? NaN : travel);
        }
      }
      turnsOut[i] = turnsNow;
      phaseOut[i] = last;
      stepOut[i] = w;
      flags[i] |= (over ? 8 : 0) | (lost ? 32 : 0);
    }
    flags[0] |= firstBits;
    state[4] = turnsNow;
    state[5] = last;
    state[0] = w;
    state[1] = lagNow;
    state[6] = travel;
    resuming = resume;
    state[7] = prevStep;
    state[2] = noiseNow;
    state[3] = recent;
    countLost = lost;
    overspeedActive = over;
    overspeedRun = overRun;
    started = isStarted;
    return length;
  }

  function reset(): void {
    started = false;
    state.fill(0);
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
      return state[4]!;
    },
    get phaseRad() {
      return state[5]!;
    },
    get stepRad() {
      return state[0]!;
    },
    options: resolved,
  };
}
