// A simulated detector with 2..4 outputs and a drifting source power, I_k = P(t)·(o_k + a_k·cos(φ − θ_k)) + noise
// (the model of docs/references.md, "three-output demodulation"). Invented test data: the layouts and drifts below are
// made up for the checks, not taken from any instrument.
import { createRandom, type ChannelParameters } from '../../src/core/index.js';

export interface DetectorSignal {
  readonly channels: Float64Array[];
  readonly power: Float64Array;
}

/** Outputs for the phase trajectory `phase`; `power(i)` gives P of sample i (default 1). */
export function detectorOutputs(
  layout: readonly ChannelParameters[],
  phase: Float64Array,
  options: { power?: (i: number) => number; noiseRms?: number; seed?: number } = {},
): DetectorSignal {
  const n = phase.length;
  const random = createRandom(options.seed ?? 1);
  const power = Float64Array.from({ length: n }, (_, i) => options.power?.(i) ?? 1);
  const channels = layout.map((channel) => {
    const out = new Float64Array(n);
    for (let i = 0; i < n; i++) {
      out[i] = power[i]! * (channel.offset + channel.amplitude * Math.cos(phase[i]! - channel.phaseRad)) + (options.noiseRms ?? 0) * random.gaussian();
    }
    return out;
  });
  return { channels, power };
}

/** A symmetric three-output head: equal offsets and gains, outputs 120° apart. */
export const SYMMETRIC_THREE: readonly ChannelParameters[] = [
  { offset: 1, amplitude: 0.8, phaseRad: 0 },
  { offset: 1, amplitude: 0.8, phaseRad: (2 * Math.PI) / 3 },
  { offset: 1, amplitude: 0.8, phaseRad: (4 * Math.PI) / 3 },
];

/** An unbalanced three-output head: unequal offsets and gains, phases away from 120°. */
export const UNBALANCED_THREE: readonly ChannelParameters[] = [
  { offset: 2.7, amplitude: 2.4, phaseRad: 0 },
  { offset: 1.1, amplitude: 1.0, phaseRad: 1.85 },
  { offset: 1.9, amplitude: 1.7, phaseRad: -2.5 },
];

/** Two balanced pairs about 90° apart, with small errors. */
export const FOUR_OUTPUTS: readonly ChannelParameters[] = [
  { offset: 1.0, amplitude: 0.7, phaseRad: 0 },
  { offset: 0.9, amplitude: 0.65, phaseRad: 1.62 },
  { offset: 1.05, amplitude: 0.72, phaseRad: 3.1 },
  { offset: 0.95, amplitude: 0.6, phaseRad: -1.5 },
];

/** A phase trajectory over many fringes with reversals: slow sweeps of varying speed (rad per sample). */
export function wanderingPhase(n: number, fringes: number): Float64Array {
  const phase = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    const t = i / n;
    phase[i] = 2 * Math.PI * fringes * (0.6 * t + 0.25 * Math.sin(2 * Math.PI * 3.3 * t) + 0.1 * Math.sin(2 * Math.PI * 7.1 * t + 1));
  }
  return phase;
}
