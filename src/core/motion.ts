// Motion profiles of invented test scenarios, as position in metres per sample, generated block by block so
// that a capture of any length needs constant memory.

import { finiteNumber, OptionError, positiveFinite } from './options.js';

export type MotionSpec =
  /** Constant velocity from position 0. */
  | { readonly kind: 'constant'; readonly velocityMS: number }
  /**
   * Point-to-point moves forth and back: accelerate, cruise, decelerate over `distanceM`, dwell, then the same
   * move back (a reversal), dwell, and again. Triangular when the distance is too short to reach the speed.
   */
  | {
      readonly kind: 'trapezoid';
      readonly distanceM: number;
      readonly maxVelocityMS: number;
      readonly accelerationMS2: number;
      readonly dwellS: number;
    }
  /** Sinusoidal vibration about a slow drift: amplitude·sin(2π f t) + driftVelocity·t. */
  | { readonly kind: 'vibration'; readonly amplitudeM: number; readonly frequencyHz: number; readonly driftVelocityMS?: number };

export interface MotionProfile {
  /** Writes the position (m) of samples firstIndex .. firstIndex + length − 1. */
  process(firstIndex: number, positionM: Float64Array, length: number): number;
  /** Largest speed of the profile in m/s. */
  readonly peakSpeedMS: number;
}

export function createMotionProfile(spec: MotionSpec, rateHz: number): MotionProfile {
  positiveFinite('rateHz', rateHz);
  const dt = 1 / rateHz;
  switch (spec.kind) {
    case 'constant': {
      const velocity = finiteNumber('velocityMS', spec.velocityMS);
      return {
        process(firstIndex, positionM, length) {
          for (let i = 0; i < length; i++) positionM[i] = velocity * (firstIndex + i) * dt;
          return length;
        },
        peakSpeedMS: Math.abs(velocity),
      };
    }
    case 'trapezoid': {
      const distance = positiveFinite('distanceM', spec.distanceM);
      const vmax = positiveFinite('maxVelocityMS', spec.maxVelocityMS);
      const accel = positiveFinite('accelerationMS2', spec.accelerationMS2);
      const dwell = finiteNumber('dwellS', spec.dwellS);
      if (dwell < 0) throw new OptionError('dwellS', 'a finite number >= 0', dwell);
      // Reach vmax only if the distance allows it; else a triangle with peak √(a·d).
      const peak = Math.min(vmax, Math.sqrt(accel * distance));
      const rampS = peak / accel;
      const rampM = 0.5 * accel * rampS * rampS;
      const cruiseS = (distance - 2 * rampM) / peak;
      const moveS = 2 * rampS + cruiseS;
      const halfCycleS = moveS + dwell;
      const along = (s: number): number => {
        if (s <= 0) return 0;
        if (s < rampS) return 0.5 * accel * s * s;
        if (s < rampS + cruiseS) return rampM + peak * (s - rampS);
        if (s < moveS) {
          const left = moveS - s;
          return distance - 0.5 * accel * left * left;
        }
        return distance;
      };
      return {
        process(firstIndex, positionM, length) {
          for (let i = 0; i < length; i++) {
            const t = (firstIndex + i) * dt;
            const cycle = t % (2 * halfCycleS);
            positionM[i] = cycle < halfCycleS ? along(cycle) : distance - along(cycle - halfCycleS);
          }
          return length;
        },
        peakSpeedMS: peak,
      };
    }
    case 'vibration': {
      const amplitude = finiteNumber('amplitudeM', spec.amplitudeM);
      const frequency = positiveFinite('frequencyHz', spec.frequencyHz);
      const drift = finiteNumber('driftVelocityMS', spec.driftVelocityMS ?? 0);
      const omega = 2 * Math.PI * frequency;
      return {
        process(firstIndex, positionM, length) {
          for (let i = 0; i < length; i++) {
            const t = (firstIndex + i) * dt;
            positionM[i] = amplitude * Math.sin(omega * t) + drift * t;
          }
          return length;
        },
        peakSpeedMS: Math.abs(amplitude) * omega + Math.abs(drift),
      };
    }
    default:
      throw new OptionError('motion.kind', 'one of "constant", "trapezoid", "vibration"', (spec as { kind: unknown }).kind);
  }
}
