// Options of the invented test scenarios shared by `simulate` and `emulate`: the motion profile and the
// detectors' ellipse and noise (ADC counts).
import type { EllipseCalibration, MotionSpec } from '../src/core/index.js';
import { numberOption, UsageError } from './cli-kit.js';

export const scenarioOptionSpecs = {
  motion: { type: 'string' },
  'velocity-m-s': { type: 'string' },
  'distance-m': { type: 'string' },
  'acceleration-m-s2': { type: 'string' },
  'dwell-s': { type: 'string' },
  'amplitude-m': { type: 'string' },
  'frequency-hz': { type: 'string' },
  'drift-m-s': { type: 'string' },
  'offset-x': { type: 'string' },
  'offset-y': { type: 'string' },
  'amplitude-x': { type: 'string' },
  'amplitude-y': { type: 'string' },
  'phase-error-rad': { type: 'string' },
  noise: { type: 'string' },
} as const;

type Values = Record<string, string | boolean | undefined | string[]>;
const num = (values: Values, name: string) => numberOption(name, values[name] as string | undefined);

/**
 * The motion profile from the options. `velocityDefault` is the constant velocity or trapezoid peak speed used
 * when --velocity-m-s is absent, or null when the command requires it.
 */
export function motionOf(values: Values, defaultKind: MotionSpec['kind'], velocityDefault: { constant: number; trapezoid: number } | null): MotionSpec {
  const kind = (values.motion as string | undefined) ?? defaultKind;
  const velocity = (fallback: number | undefined): number => {
    const value = num(values, 'velocity-m-s') ?? fallback;
    if (value === undefined) throw new UsageError(`--velocity-m-s is required for --motion ${kind}`);
    return value;
  };
  switch (kind) {
    case 'constant':
      return { kind, velocityMS: velocity(velocityDefault?.constant) };
    case 'trapezoid':
      return {
        kind,
        distanceM: num(values, 'distance-m') ?? 20e-6,
        maxVelocityMS: velocity(velocityDefault?.trapezoid),
        accelerationMS2: num(values, 'acceleration-m-s2') ?? 20,
        dwellS: num(values, 'dwell-s') ?? 0.002,
      };
    case 'vibration':
      return { kind, amplitudeM: num(values, 'amplitude-m') ?? 2e-6, frequencyHz: num(values, 'frequency-hz') ?? 200, driftVelocityMS: num(values, 'drift-m-s') ?? 0 };
    default:
      throw new UsageError(`--motion must be constant, trapezoid or vibration (got "${kind}")`);
  }
}

/** The detectors' ellipse in ADC counts (defaults: offsets 800, −500; amplitudes 12000, 10800; 0.06 rad). */
export function ellipseOf(values: Values): EllipseCalibration {
  return {
    offsetX: num(values, 'offset-x') ?? 800,
    offsetY: num(values, 'offset-y') ?? -500,
    amplitudeX: num(values, 'amplitude-x') ?? 12000,
    amplitudeY: num(values, 'amplitude-y') ?? 10800,
    phaseErrorRad: num(values, 'phase-error-rad') ?? 0.06,
  };
}

/** Gaussian noise per channel, counts RMS (default 20). */
export function noiseOf(values: Values): number {
  return num(values, 'noise') ?? 20;
}
