// Watches a running measurement for signals that leave the calibration's model, so that a stale calibration never
// passes silently: the alarm `calibration_stale` is raised when, over the recent samples, the mean corrected radius
// moves away from the calibrated radius, or the radius scatters much more than it did when the ellipse was fitted
// (a residual harmonic growing, a ghost beam appearing, the ellipse changing shape).
//
// Why these bounds: with the ellipse's offsets moving in proportion to the radius (DC-coupled detectors whose
// source power drifts), a radius change δ can move the phase by up to δ rad; the default 5 % is 0.05 rad, 2.5 nm
// with a He-Ne at fold 2. A radius harmonic of relative amplitude a can come with a phase error of a rad (ghost-beam
// model, see residual.ts), and it raises the radius RMS by a/√2.

import { integerInRange, numberInRange } from '../options.js';

export interface ModelWatchOptions {
  /** Samples the running means remember (exponential forgetting). Default 4096; integer 16..2^31. */
  readonly windowSamples?: number;
  /** Largest accepted |mean radius − 1| over the window, relative to the calibrated radius. Default 0.05; (0, 1]. */
  readonly maxRadiusChange?: number;
  /**
   * Largest accepted RMS of (radius − mean radius) over the window, relative. Default max(0.01, 3 × the fit's
   * residual RMS) when `fitResidualRms` is given, else 0.01; (0, 1].
   */
  readonly maxRadiusRms?: number;
  /** The calibration fit's residual RMS (relative), which sets the default of maxRadiusRms. */
  readonly fitResidualRms?: number;
}

export interface ModelWatchEvent {
  readonly sampleIndex: number;
  readonly state: 'raised' | 'cleared';
  /** What left the model: the mean radius (value: mean radius − 1) or the radius scatter (value: its RMS). */
  readonly cause: 'radius-change' | 'radius-scatter';
  readonly value: number;
}

export interface ModelWatch {
  /**
   * Takes corrected samples (u, v: unit circle on the calibration); `use[i]` 0 or non-finite values skip a sample
   * (a blocked beam is the signal monitor's business, not a model change). Pushes an event only when the state
   * changes. Never allocates otherwise.
   */
  process(u: ArrayLike<number>, v: ArrayLike<number>, length: number, firstIndex: number, events: ModelWatchEvent[], use?: ArrayLike<number>): void;
  /** The same for corrected radii √(u² + v²) already at hand, e.g. a pipeline's level with a calibration. */
  processRadius(radius: ArrayLike<number>, length: number, firstIndex: number, events: ModelWatchEvent[], use?: ArrayLike<number>): void;
  readonly active: boolean;
  /** The running mean radius and RMS scatter (relative). */
  readonly meanRadius: number;
  readonly radiusRms: number;
  readonly options: Readonly<Required<Omit<ModelWatchOptions, 'fitResidualRms'>>>;
  reset(): void;
}

/** The alarm's name in text output. */
export const MODEL_WATCH_ALARM = 'calibration_stale';

export function createModelWatch(options: ModelWatchOptions = {}): ModelWatch {
  const windowSamples = integerInRange('windowSamples', options.windowSamples ?? 4096, 16, 2 ** 31);
  const maxRadiusChange = numberInRange('maxRadiusChange', options.maxRadiusChange ?? 0.05, 0, 1, true);
  const fitResidual = options.fitResidualRms === undefined ? 0 : numberInRange('fitResidualRms', options.fitResidualRms, 0, 1);
  const maxRadiusRms = numberInRange('maxRadiusRms', options.maxRadiusRms ?? Math.max(0.01, 3 * fitResidual), 0, 1, true);
  const resolved = Object.freeze({ windowSamples, maxRadiusChange, maxRadiusRms });
  const lambda = 1 - 1 / windowSamples;
  // Clears only well inside the bound, so a signal at the bound does not chatter.
  const clearFraction = 0.8;
  // The cheap tests' margins (see `watch`): a relative millionth, far beyond their rounding (~1e-12 of the bound).
  const changeSure = maxRadiusChange * (1 - 1e-6);
  const spreadSure = maxRadiusRms * maxRadiusRms * (1 - 1e-6);
  const clearChangeSure = clearFraction * maxRadiusChange * (1 + 1e-6);
  const clearSpreadSure = (clearFraction * maxRadiusRms) ** 2 * (1 + 1e-6);
  let weight = 0;
  let sum = 0;
  let squares = 0;
  let active = false;
  let cause: ModelWatchEvent['cause'] = 'radius-change';

  function process(u: ArrayLike<number>, v: ArrayLike<number>, length: number, firstIndex: number, events: ModelWatchEvent[], use?: ArrayLike<number>): void {
    watch(u, v, false, length, firstIndex, events, use);
  }

  function processRadius(radius: ArrayLike<number>, length: number, firstIndex: number, events: ModelWatchEvent[], use?: ArrayLike<number>): void {
    watch(radius, radius, true, length, firstIndex, events, use);
  }

  /** The running means over a block, from (u, v) or from radii in `a` (`radiusGiven`), and the alarm's state. */
  function watch(a: ArrayLike<number>, b: ArrayLike<number>, radiusGiven: boolean, length: number, firstIndex: number, events: ModelWatchEvent[], use?: ArrayLike<number>): void {
    // `- 0` (an identity) types them as numbers: a loop that starts from closure variables kept them boxed and
    // allocated a heap number per sample (48 bytes a sample, 16 % of a replay's time in GC).
    let w = weight - 0, s = sum - 0, q = squares - 0;
    for (let i = 0; i < length; i++) {
      const ai = a[i]!;
      const bi = b[i]!;
      const r = radiusGiven ? ai : Math.sqrt(ai * ai + bi * bi);
      if ((use !== undefined && !use[i]) || !(r > 0 && r < Infinity)) continue;
      w = lambda * w + 1;
      s = lambda * s + r;
      q = lambda * q + r * r;
      // Judge only once the memory is mostly filled.
      if (w < windowSamples / 2) continue;
      // Without a divide or a square root: |mean − 1|·w = |s − w| and RMS²·w² = q·w − s². Only where either comes
      // within a millionth of its bound does the exact test below decide, so the decisions are the exact test's.
      const changeW = s > w ? s - w : w - s;
      const spreadW = q * w - s * s;
      if (!active ? changeW < changeSure * w && spreadW < spreadSure * w * w : changeW > clearChangeSure * w || spreadW > clearSpreadSure * w * w) continue;
      const mean = s / w;
      const rms = Math.sqrt(Math.max(0, q / w - mean * mean));
      const change = Math.abs(mean - 1);
      if (!active) {
        if (change > maxRadiusChange || rms > maxRadiusRms) {
          active = true;
          cause = change > maxRadiusChange ? 'radius-change' : 'radius-scatter';
          events.push({ sampleIndex: firstIndex + i, state: 'raised', cause, value: cause === 'radius-change' ? mean - 1 : rms });
        }
      } else if (change < clearFraction * maxRadiusChange && rms < clearFraction * maxRadiusRms) {
        active = false;
        events.push({ sampleIndex: firstIndex + i, state: 'cleared', cause, value: cause === 'radius-change' ? mean - 1 : rms });
      }
    }
    weight = w;
    sum = s;
    squares = q;
  }

  function reset(): void {
    weight = 0;
    sum = 0;
    squares = 0;
    active = false;
  }

  reset();
  return {
    process,
    processRadius,
    get active() {
      return active;
    },
    get meanRadius() {
      return weight > 0 ? sum / weight : NaN;
    },
    get radiusRms() {
      return weight > 0 ? Math.sqrt(Math.max(0, squares / weight - (sum / weight) ** 2)) : NaN;
    },
    options: resolved,
    reset,
  };
}
