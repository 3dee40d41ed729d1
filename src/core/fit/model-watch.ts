// Watches a running measurement for signals that leave the calibration's model, so that a stale calibration never
// passes silently: the alarm `calibration_stale` is raised when, over the recent samples, the mean corrected radius
// moves away from the calibrated radius, or the radius scatters much more than it did when the ellipse was fitted
// (a residual harmonic growing, a ghost beam appearing, the ellipse changing shape).
//
// Why these bounds: with the ellipse's offsets moving in proportion to the radius (DC-coupled detectors whose
// source power drifts), a radius change δ can move the phase by up to δ rad; the default 5 % is 0.05 rad, 2.5 nm
// with a He-Ne at fold 2. A radius harmonic of relative amplitude a can come with a phase error of a rad (ghost-beam
// model, see residual.ts), and it raises the radius RMS by a/√2.

import { integerInRange, numberInRange, OptionError } from '../options.js';

export interface ModelWatchOptions {
  /** Samples the running means remember (exponential forgetting, taken in MODEL_WATCH_CHUNK_SAMPLES at a time). Default 4096; integer 16..2^31. */
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
  /**
   * The chunks' sums where every sample is taken (see ModelWatchChunkSums). Default: this module's loop; src/accel's
   * createModelWatchChunkSums gives the same doubles faster.
   */
  readonly chunkSums?: ModelWatchChunkSums;
}

/**
 * Σr and Σr² (each over the chunk's MODEL_WATCH_CHUNK_SAMPLES radii in order) of the chunks of `radius` that start at
 * `from`, from + chunk … and end by `to`, written to sums[2c], sums[2c + 1] for chunk c, up to sums.length / 2 chunks
 * and no further than the first chunk with a radius not in (0, ∞). Returns the chunks summed: fewer leaves the rest
 * to the model watch's own loop, 0 any array it does not take.
 */
export type ModelWatchChunkSums = (radius: ArrayLike<number>, from: number, to: number, sums: Float64Array) => number;

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
   * changes. Never allocates otherwise, but for a buffer of radii when a block is longer than any before.
   */
  process(u: ArrayLike<number>, v: ArrayLike<number>, length: number, firstIndex: number, events: ModelWatchEvent[], use?: ArrayLike<number>): void;
  /** The same for corrected radii √(u² + v²) already at hand, e.g. a pipeline's level with a calibration. */
  processRadius(radius: ArrayLike<number>, length: number, firstIndex: number, events: ModelWatchEvent[], use?: ArrayLike<number>): void;
  readonly active: boolean;
  /** The running mean radius and RMS scatter (relative). */
  readonly meanRadius: number;
  readonly radiusRms: number;
  readonly options: Readonly<Required<Omit<ModelWatchOptions, 'fitResidualRms' | 'chunkSums'>>>;
  reset(): void;
}

/** The alarm's name in text output. */
export const MODEL_WATCH_ALARM = 'calibration_stale';

/**
 * Valid samples the running means take in at once, and how often the alarm is judged: per sample, the exponential
 * recurrence is a chain of dependent multiply-adds that cost a replay more than the rest of its analyses; summed in
 * chunks it is a few additions a sample. An event falls on the last sample of its chunk, at most 15 samples after
 * the sample-by-sample form would put it, against a memory of thousands.
 */
export const MODEL_WATCH_CHUNK_SAMPLES = 16;

export function createModelWatch(options: ModelWatchOptions = {}): ModelWatch {
  const windowSamples = integerInRange('windowSamples', options.windowSamples ?? 4096, 16, 2 ** 31);
  const maxRadiusChange = numberInRange('maxRadiusChange', options.maxRadiusChange ?? 0.05, 0, 1, true);
  const fitResidual = options.fitResidualRms === undefined ? 0 : numberInRange('fitResidualRms', options.fitResidualRms, 0, 1);
  const maxRadiusRms = numberInRange('maxRadiusRms', options.maxRadiusRms ?? Math.max(0.01, 3 * fitResidual), 0, 1, true);
  const resolved = Object.freeze({ windowSamples, maxRadiusChange, maxRadiusRms });
  const chunkSums = options.chunkSums;
  if (chunkSums !== undefined && typeof chunkSums !== 'function') throw new OptionError('chunkSums', 'a function', chunkSums);
  // What chunkSums hands back: up to 256 chunks (a block of 4096 samples) a call.
  const sums = new Float64Array(chunkSums === undefined ? 0 : 512);
  const chunk = MODEL_WATCH_CHUNK_SAMPLES;
  // Each sample of the memory decays by 1 − 1/windowSamples per sample that follows it, applied a chunk at a time.
  const decay = (1 - 1 / windowSamples) ** chunk;
  // Clears only well inside the bound, so a signal at the bound does not chatter.
  const clearFraction = 0.8;
  // The running sums: weight, Σ radius, Σ radius², forgotten exponentially. In a typed array: a double in a closure's
  // variable is boxed, so each chunk would allocate three numbers.
  const running = new Float64Array(3);
  // The chunk being filled: its valid samples so far, their radii's sum and sum of squares.
  const pending = new Float64Array(3);
  let active = false;
  let cause: ModelWatchEvent['cause'] = 'radius-change';

  // Radii of (u, v) pairs for `process`; grows to the largest block seen.
  let radii = new Float64Array(0);

  function process(u: ArrayLike<number>, v: ArrayLike<number>, length: number, firstIndex: number, events: ModelWatchEvent[], use?: ArrayLike<number>): void {
    if (radii.length < length) radii = new Float64Array(length);
    for (let i = 0; i < length; i++) radii[i] = Math.sqrt(u[i]! * u[i]! + v[i]! * v[i]!);
    processRadius(radii, length, firstIndex, events, use);
  }

  function processRadius(radius: ArrayLike<number>, length: number, firstIndex: number, events: ModelWatchEvent[], use?: ArrayLike<number>): void {
    let n = pending[0]!, cs = pending[1]!, cq = pending[2]!;
    let i = 0;
    while (i < length) {
      // Between chunks, a run of `chunk` samples that are all taken is a chunk: summed in a loop that neither counts
      // nor branches but to leave at a sample that is not taken (then the run goes sample by sample below). The
      // same sums in the same order, so the same chunks to the bit. With every sample taken, chunkSums may sum them.
      while (n === 0 && use === undefined && chunkSums !== undefined && i + chunk <= length) {
        const count = chunkSums(radius, i, length, sums);
        for (let c = 0; c < count; c++) {
          i += chunk;
          takeChunk(sums[2 * c]!, sums[2 * c + 1]!, firstIndex + i - 1, events);
        }
        if (2 * count < sums.length) break;
      }
      while (n === 0 && i + chunk <= length) {
        const end = i + chunk;
        let s = 0, q = 0, k = i;
        for (; k < end; k++) {
          const r = radius[k]!;
          if ((use !== undefined && !use[k]) || !(r > 0 && r < Infinity)) break;
          s += r;
          q += r * r;
        }
        if (k < end) break;
        takeChunk(s, q, firstIndex + end - 1, events);
        i = end;
      }
      if (i === length) break;
      const r = radius[i]!;
      if (!((use !== undefined && !use[i]) || !(r > 0 && r < Infinity))) {
        cs += r;
        cq += r * r;
        if (++n === chunk) {
          takeChunk(cs, cq, firstIndex + i, events);
          n = cs = cq = 0;
        }
      }
      i++;
    }
    pending[0] = n;
    pending[1] = cs;
    pending[2] = cq;
  }

  /** A full chunk's sums into the running means, and the alarm's state judged at its last sample. */
  function takeChunk(chunkSum: number, chunkSquares: number, sampleIndex: number, events: ModelWatchEvent[]): void {
    const weight = (running[0] = decay * running[0]! + chunk);
    const sum = (running[1] = decay * running[1]! + chunkSum);
    const squares = (running[2] = decay * running[2]! + chunkSquares);
    // Judge only once the memory is mostly filled.
    if (weight < windowSamples / 2) return;
    const mean = sum / weight;
    const rms = Math.sqrt(Math.max(0, squares / weight - mean * mean));
    const change = Math.abs(mean - 1);
    if (!active) {
      if (change > maxRadiusChange || rms > maxRadiusRms) {
        active = true;
        cause = change > maxRadiusChange ? 'radius-change' : 'radius-scatter';
        events.push({ sampleIndex, state: 'raised', cause, value: cause === 'radius-change' ? mean - 1 : rms });
      }
    } else if (change < clearFraction * maxRadiusChange && rms < clearFraction * maxRadiusRms) {
      active = false;
      events.push({ sampleIndex, state: 'cleared', cause, value: cause === 'radius-change' ? mean - 1 : rms });
    }
  }

  function reset(): void {
    running.fill(0);
    pending.fill(0);
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
      return running[0]! > 0 ? running[1]! / running[0]! : NaN;
    },
    get radiusRms() {
      const [weight, sum, squares] = [running[0]!, running[1]!, running[2]!];
      return weight > 0 ? Math.sqrt(Math.max(0, squares / weight - (sum / weight) ** 2)) : NaN;
    },
    options: resolved,
    reset,
  };
}
