// Synthetic quadrature test signals (invented scenarios, not measurements) and block helpers for the stream tests.
import { createQuadratureSynthesizer, type EllipseCalibration, type PipelineOptions } from '../../src/core/index.js';
import type { AxisBlock, FrameBlock } from '../../src/stream/index.js';

/** Unstabilised He-Ne vacuum wavelength, 632.9908 nm (CIPM Recommendation 2, 2007; published). */
export const HE_NE_M = 632.9908e-9;
/** Displacement per fringe λ/(N·n) with N = 2 single pass, n = 1 (common practice). */
export const METRES_PER_FRINGE = HE_NE_M / 2;

export const ellipse: EllipseCalibration = { offsetX: 900, offsetY: -600, amplitudeX: 12000, amplitudeY: 10500, phaseErrorRad: 0.08 };
export const axisOptions: PipelineOptions = { rateHz: 1e6, wavelengthM: HE_NE_M, fold: 2, calibration: ellipse };

/** Float samples of the phase trajectory through `ellipse` (no noise, no quantisation). */
export function quadrature(phaseRad: ArrayLike<number>, calibration: EllipseCalibration = ellipse): { x: Float64Array; y: Float64Array } {
  const x = new Float64Array(phaseRad.length);
  const y = new Float64Array(phaseRad.length);
  createQuadratureSynthesizer({ ellipse: calibration }).process(phaseRad, x, y, phaseRad.length);
  return { x, y };
}

/** A constant-speed ramp of `fringes` fringes over `samples` samples, starting at phase 0. */
export function ramp(samples: number, fringes: number): Float64Array {
  const phase = new Float64Array(samples);
  for (let i = 0; i < samples; i++) phase[i] = (2 * Math.PI * fringes * i) / samples;
  return phase;
}

/** Splits x, y into AxisBlocks at the given ends (copies, so each block owns its arrays). */
export function axisBlocks(x: Float64Array, y: Float64Array, ends: readonly number[]): AxisBlock[] {
  const blocks: AxisBlock[] = [];
  let start = 0;
  for (const end of [...ends, x.length]) {
    blocks.push({ x: x.slice(start, end), y: y.slice(start, end), length: end - start });
    start = end;
  }
  return blocks;
}

/** Interleaves per-axis int16 signals into one frame block (channel 2k = x, 2k + 1 = y of axis k). */
export function frame(axes: readonly { x: ArrayLike<number>; y: ArrayLike<number> }[], start: number, length: number, gapBefore = 0): FrameBlock {
  const channelCount = 2 * axes.length;
  const samples = new Int16Array(channelCount * length);
  for (let s = 0; s < length; s++) {
    for (let k = 0; k < axes.length; k++) {
      samples[s * channelCount + 2 * k] = Math.round(axes[k]!.x[start + s]!);
      samples[s * channelCount + 2 * k + 1] = Math.round(axes[k]!.y[start + s]!);
    }
  }
  return { samples, channelCount, samplesPerFrame: length, gapBefore };
}

/** Sorted distinct cut points in 1..length-1 from arbitrary integers (for block-split properties). */
export function cuts(raw: readonly number[], length: number): number[] {
  return [...new Set(raw.map((value) => 1 + (value % (length - 1))))].sort((a, b) => a - b);
}

export function round(value: number, digits: number): number {
  const scale = 10 ** digits;
  return Math.round(value * scale) / scale;
}
