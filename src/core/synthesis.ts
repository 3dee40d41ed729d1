// Synthetic quadrature signals for tests, benchmarks and the simulator: a phase trajectory through a known
// ellipse, with Gaussian noise, ADC quantisation and clipping. Deterministic for a given seed.

import type { EllipseCalibration } from './fit/ellipse.js';
import { validateCalibration } from './correction.js';
import { adcLimits, type AdcFormat } from './monitor.js';
import { finiteNumber, integerInRange, OptionError } from './options.js';

/** A small seeded generator (mulberry32) with Gaussian draws (Box–Muller); not for cryptography. */
export interface Random {
  uniform(): number;
  gaussian(): number;
}

export function createRandom(seed: number): Random {
  let state = integerInRange('seed', seed, 0, 2 ** 32 - 1) >>> 0;
  let spare = NaN;
  function uniform(): number {
    state = (state + 0x6d2b79f5) >>> 0;
    let t = state;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  }
  function gaussian(): number {
    if (spare === spare) {
      const held = spare;
      spare = NaN;
      return held;
    }
    const radius = Math.sqrt(-2 * Math.log(1 - uniform()));
    const angle = 2 * Math.PI * uniform();
    spare = radius * Math.sin(angle);
    return radius * Math.cos(angle);
  }
  return { uniform, gaussian };
}

export interface QuadratureSynthesizerOptions {
  /** The ellipse the detectors draw, in output units (ADC counts when quantised). */
  readonly ellipse: EllipseCalibration;
  /** Gaussian noise on each channel, standard deviation in output units. Default 0. */
  readonly noiseRms?: number;
  /** Rounds to the ADC's integer codes and clips at its full scale (floats: clipped only). Default none. */
  readonly adc?: AdcFormat | null;
  /** Seed of the noise generator. Default 1. */
  readonly seed?: number;
}

export interface QuadratureSynthesizer {
  /**
   * x = g·aX cos φ + oX + noise, y = g·aY sin(φ + e) + oY + noise, for the phases given (rad); the optional
   * gain g per sample (default 1) models beam interruptions and intensity changes.
   */
  process(
    phaseRad: ArrayLike<number>,
    x: { [i: number]: number },
    y: { [i: number]: number },
    length: number,
    gain?: ArrayLike<number>,
  ): number;
  reset(): void;
}

export function createQuadratureSynthesizer(options: QuadratureSynthesizerOptions): QuadratureSynthesizer {
  const ellipse = validateCalibration(options.ellipse, 'ellipse');
  const noiseRms = finiteNumber('noiseRms', options.noiseRms ?? 0);
  if (noiseRms < 0) throw new OptionError('noiseRms', 'a finite number >= 0', noiseRms);
  const seed = options.seed ?? 1;
  const adc = options.adc ?? null;
  const limits = adc === null ? null : adcLimits(adc);
  const rounds = adc !== null && adc.kind !== 'float';
  let random = createRandom(seed);

  function quantise(value: number): number {
    if (limits === null) return value;
    const coded = rounds ? Math.round(value) : value;
    return coded < limits.low ? limits.low : coded > limits.high ? limits.high : coded;
  }

  function process(
    phaseRad: ArrayLike<number>,
    x: { [i: number]: number },
    y: { [i: number]: number },
    length: number,
    gain?: ArrayLike<number>,
  ): number {
    const { offsetX, offsetY, amplitudeX, amplitudeY, phaseErrorRad } = ellipse;
    for (let i = 0; i < length; i++) {
      const phase = phaseRad[i]!;
      const g = gain === undefined ? 1 : gain[i]!;
      let xi = g * amplitudeX * Math.cos(phase) + offsetX;
      let yi = g * amplitudeY * Math.sin(phase + phaseErrorRad) + offsetY;
      if (noiseRms > 0) {
        xi += noiseRms * random.gaussian();
        yi += noiseRms * random.gaussian();
      }
      x[i] = quantise(xi);
      y[i] = quantise(yi);
    }
    return length;
  }

  return {
    process,
    reset() {
      random = createRandom(seed);
    },
  };
}
