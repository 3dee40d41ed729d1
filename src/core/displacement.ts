// Displacement: position = (count + fraction) · λ_vac / (fold · n), relative to a reference sample; velocity in m/s.

import { numberInRange, positiveFinite } from './options.js';
import { TWO_PI } from './phase.js';

export interface DisplacementOptions {
  /** Vacuum wavelength of the laser in metres, e.g. 632.9908e-9 for an unstabilised He-Ne. Required. */
  readonly wavelengthM: number;
  /** Optical fold: fringes per wavelength of motion; 2 single pass (retroreflector), 4 double-pass plane mirror. Required; any positive number. */
  readonly fold: number;
  /** Refractive index of the measuring path. Default 1 (vacuum wavelength used as is); range [1, 1.01). */
  readonly refractiveIndex?: number;
  /** Sample rate in Hz, for velocity. Required. */
  readonly rateHz: number;
  /** Factor on every length and velocity, e.g. the normalisation to 20 °C, 1/(1 + α(T − 20)). Default 1; positive. */
  readonly lengthScale?: number;
  /** Accelerated displacement loop (same results to the bit, e.g. WebAssembly). Default none: the JavaScript loop. */
  readonly kernel?: PlaceKernel | null;
}

/**
 * A replacement of the displacement loop: position (turns − refTurns)·perFringe + (phase − refPhase)·perRad and
 * velocity step·perStep for each sample, to the bit.
 */
export interface PlaceKernel {
  place(
    turns: Float64Array,
    phaseRad: Float64Array,
    stepRad: Float64Array,
    length: number,
    positionM: Float64Array,
    velocityMS: Float64Array,
    refTurns: number,
    refPhase: number,
    perFringe: number,
    perRad: number,
    perStep: number,
    unwrappedPhaseRad?: Float64Array,
  ): void;
}

export interface Displacement {
  /**
   * From whole turns, wrapped phase (rad) and loop step (rad/sample) writes position (m, relative to the
   * reference) and velocity (m/s). The first sample processed after construction, reset or
   * `referenceAtNext()` becomes the reference (position 0).
   */
  process(
    turns: Float64Array,
    phaseRad: Float64Array,
    stepRad: Float64Array,
    length: number,
    positionM: Float64Array,
    velocityMS: Float64Array,
    /** Optional: 2π·turns + phase, the phase without wraps (rad), for analyses that need it. */
    unwrappedPhaseRad?: Float64Array,
  ): number;
  referenceAtNext(): void;
  /** Changes the index of the path: the scale of the reading changes, the fringe count does not. */
  setRefractiveIndex(refractiveIndex: number): void;
  /** Displacement of one fringe in metres: λ_vac / (fold · n), times the length scale. */
  readonly metresPerFringe: number;
  readonly refractiveIndex: number;
  reset(): void;
}

/** The refractive-index rule of every stage: [1, 1.01). */
export function validateRefractiveIndex(value: unknown): number {
  return numberInRange('refractiveIndex', value, 1, 1.01);
}

export function createDisplacement(options: DisplacementOptions): Displacement {
  const wavelengthM = positiveFinite('wavelengthM', options.wavelengthM);
  const fold = positiveFinite('fold', options.fold);
  const rateHz = positiveFinite('rateHz', options.rateHz);
  let refractiveIndex = validateRefractiveIndex(options.refractiveIndex ?? 1);
  const lengthScale = positiveFinite('lengthScale', options.lengthScale ?? 1);
  const place = options.kernel?.place;
  let metresPerFringe = 0;
  let metresPerRad = 0;
  let velocityPerStep = 0;
  let referencePending = true;
  let referenceTurns = 0;
  let referencePhase = 0;

  function updateScale(): void {
    metresPerFringe = (wavelengthM / (fold * refractiveIndex)) * lengthScale;
    metresPerRad = metresPerFringe / TWO_PI;
    velocityPerStep = metresPerRad * rateHz;
  }

  function process(
    turns: Float64Array,
    phaseRad: Float64Array,
    stepRad: Float64Array,
    length: number,
    positionM: Float64Array,
    velocityMS: Float64Array,
    unwrappedPhaseRad?: Float64Array,
  ): number {
    if (referencePending && length > 0) {
      referencePending = false;
      referenceTurns = turns[0]!;
      referencePhase = phaseRad[0]!;
    }
    const perFringe = metresPerFringe, perRad = metresPerRad, perStep = velocityPerStep;
    const refTurns = referenceTurns, refPhase = referencePhase;
    if (place) place(turns, phaseRad, stepRad, length, positionM, velocityMS, refTurns, refPhase, perFringe, perRad, perStep, unwrappedPhaseRad);
    else {
      for (let i = 0; i < length; i++) {
        // Integer and fractional parts are differenced separately: exact for counts far beyond 2^32.
        positionM[i] = (turns[i]! - refTurns) * perFringe + (phaseRad[i]! - refPhase) * perRad;
        velocityMS[i] = stepRad[i]! * perStep;
      }
      if (unwrappedPhaseRad) for (let i = 0; i < length; i++) unwrappedPhaseRad[i] = TWO_PI * turns[i]! + phaseRad[i]!;
    }
    return length;
  }

  updateScale();
  return {
    process,
    referenceAtNext() {
      referencePending = true;
    },
    setRefractiveIndex(next: number) {
      refractiveIndex = validateRefractiveIndex(next);
      updateScale();
    },
    get metresPerFringe() {
      return metresPerFringe;
    },
    get refractiveIndex() {
      return refractiveIndex;
    },
    reset() {
      referencePending = true;
      referenceTurns = 0;
      referencePhase = 0;
    },
  };
}
