// Channel combining: 3 or 4 detector outputs of one axis to the power-normalised quadrature pair and the source
// power, sample by sample, and the pipeline that runs the usual chain on that pair (see fit/channel-fit.ts).

import { AlarmBit, pushAlarm, type AlarmEvent } from './alarms.js';
import { demodulationMatrix, MAX_CHANNELS, validateChannelParameters, type ChannelParameters } from './fit/channel-fit.js';
import { adcLimits, type AdcFormat } from './monitor.js';
import { integerInRange, numberInRange, OptionError } from './options.js';
import { createPipeline, type Pipeline, type PipelineOptions, type PipelineOutput, type SampleArray } from './pipeline.js';

export interface ChannelCombinerOptions {
  /** Every output's parameters (3 or 4 channels), e.g. from a calibration file. Required. */
  readonly channels: readonly ChannelParameters[];
  /** ADC format of the raw outputs, for saturation. Default `{ kind: 'int16' }`. */
  readonly adc?: AdcFormat;
  /**
   * Low-power alarm below this source power, relative to the calibration's mean power. Default 0.5 (half the
   * light: a blocked or failing source, not drift); range (0, 1). Below it the pair is no longer scaled to
   * radius 1 but by this level, so the low-signal alarm and the phase hold take over as the light vanishes.
   */
  readonly lowPowerLevel?: number;
  /** Low-power alarm clears at or above this power. Default max(0.6, lowPowerLevel); range [lowPowerLevel, 1]. */
  readonly lowPowerClearLevel?: number;
  /** An alarm clears after this many consecutive good samples. Default 32; integer 1..2^31. */
  readonly clearHoldSamples?: number;
}

export interface ChannelCombiner {
  /**
   * For `length` samples of the outputs: writes u = P·cos φ / P̂, v = P·sin φ / P̂ (radius 1 on the calibrated
   * model whatever the power; P̂ = max(P, lowPowerLevel)), the source power P (1 = the calibration's mean; NaN for
   * non-finite outputs), ORs the low-power and saturation bits into `flags` and pushes their state changes onto
   * `events` (absolute indices from `firstIndex`). Never throws on signal content; allocates only for events.
   */
  process(
    channels: readonly ArrayLike<number>[],
    length: number,
    u: Float64Array,
    v: Float64Array,
    power: Float32Array,
    flags: Uint8Array,
    firstIndex: number,
    events: AlarmEvent[],
  ): number;
  setChannels(channels: readonly ChannelParameters[]): void;
  readonly channels: readonly ChannelParameters[];
  readonly options: { readonly lowPowerLevel: number; readonly lowPowerClearLevel: number; readonly clearHoldSamples: number };
  /** True while neither of its alarms is active. */
  readonly quiet: boolean;
  reset(): void;
}

export function createChannelCombiner(options: ChannelCombinerOptions): ChannelCombiner {
  if (options === null || typeof options !== 'object') throw new OptionError('options', 'a record with channels', options);
  const { low, high } = adcLimits(options.adc ?? { kind: 'int16' });
  const lowPowerLevel = numberInRange('lowPowerLevel', options.lowPowerLevel ?? 0.5, 0, 1, true);
  const lowPowerClearLevel = numberInRange('lowPowerClearLevel', options.lowPowerClearLevel ?? Math.max(0.6, lowPowerLevel), lowPowerLevel, 1);
  const clearHoldSamples = integerInRange('clearHoldSamples', options.clearHoldSamples ?? 32, 1, 2 ** 31);
  const resolved = Object.freeze({ lowPowerLevel, lowPowerClearLevel, clearHoldSamples });
  let channels: readonly ChannelParameters[] = [];
  let k = 0;
  const matrix = new Float64Array(3 * MAX_CHANNELS);
  let lowActive = false;
  let lowRun = 0;
  let saturationActive = false;
  let saturationRun = 0;

  function setChannels(next: readonly ChannelParameters[]): void {
    const checked = validateChannelParameters(next, 'channels');
    if (checked.length < 3) throw new OptionError('channels.length', 'an integer in 3..4 (two outputs take the ellipse correction, no combining)', checked.length);
    if (k !== 0 && checked.length !== k) throw new OptionError('channels.length', `${k}, the channel count this combiner was built for`, checked.length);
    channels = checked;
    k = checked.length;
    demodulationMatrix(checked, matrix);
  }

  function process(
    inputs: readonly ArrayLike<number>[],
    length: number,
    u: Float64Array,
    v: Float64Array,
    power: Float32Array,
    flags: Uint8Array,
    firstIndex: number,
    events: AlarmEvent[],
  ): number {
    const count = k, w = matrix, floor = lowPowerLevel, clear = lowPowerClearLevel, hold = clearHoldSamples, lo = low, hi = high;
    const in0 = inputs[0]!, in1 = inputs[1]!, in2 = inputs[2]!, in3 = count > 3 ? inputs[3]! : in2;
    const w00 = w[0]!, w01 = w[1]!, w02 = w[2]!, w03 = count > 3 ? w[3]! : 0;
    const w10 = w[count]!, w11 = w[count + 1]!, w12 = w[count + 2]!, w13 = count > 3 ? w[count + 3]! : 0;
    const w20 = w[2 * count]!, w21 = w[2 * count + 1]!, w22 = w[2 * count + 2]!, w23 = count > 3 ? w[2 * count + 3]! : 0;
    for (let i = 0; i < length; i++) {
      const a = in0[i]!, b = in1[i]!, c = in2[i]!, d = count > 3 ? in3[i]! : 0;
      const p = w00 * a + w01 * b + w02 * c + w03 * d;
      const scale = 1 / (p > floor ? p : floor);
      u[i] = (w10 * a + w11 * b + w12 * c + w13 * d) * scale;
      v[i] = (w20 * a + w21 * b + w22 * c + w23 * d) * scale;
      power[i] = p;
      let bits = 0;
      if (a <= lo || a >= hi || b <= lo || b >= hi || c <= lo || c >= hi || (count > 3 && (d <= lo || d >= hi))) {
        saturationRun = 0;
        if (!saturationActive) {
          saturationActive = true;
          pushAlarm(events, firstIndex + i, 'saturation', true, Math.max(Math.abs(a), Math.abs(b), Math.abs(c), Math.abs(d)));
        }
      } else if (saturationActive && ++saturationRun >= hold) {
        saturationActive = false;
        pushAlarm(events, firstIndex + i, 'saturation', false, NaN);
      }
      if (saturationActive) bits |= AlarmBit.saturation;
      // A non-finite power (bad sample) leaves the low-power state alone: the bad-sample alarm covers it.
      if (p < floor) {
        lowRun = 0;
        if (!lowActive) {
          lowActive = true;
          pushAlarm(events, firstIndex + i, 'lowPower', true, p);
        }
      } else if (lowActive && p === p) {
        if (p < clear) lowRun = 0;
        else if (++lowRun >= hold) {
          lowActive = false;
          pushAlarm(events, firstIndex + i, 'lowPower', false, p);
        }
      }
      if (lowActive) bits |= AlarmBit.lowPower;
      flags[i] |= bits;
    }
    return length;
  }

  function reset(): void {
    lowActive = false;
    lowRun = 0;
    saturationActive = false;
    saturationRun = 0;
  }

  setChannels(options.channels);
  reset();
  return {
    process,
    setChannels,
    get channels() {
      return channels;
    },
    options: resolved,
    get quiet() {
      return !lowActive && !saturationActive;
    },
    reset,
  };
}

export interface ChannelPipelineOptions extends Omit<PipelineOptions, 'calibration' | 'frontEnd'>, Omit<ChannelCombinerOptions, 'adc'> {}

/** The pipeline's outputs plus the source power of each sample (1 = the calibration's mean power). */
export interface ChannelPipelineOutput extends PipelineOutput {
  readonly power: Float32Array;
}

export interface ChannelPipeline {
  /**
   * Processes `length` samples of the 3 or 4 outputs (`channels[k]`), as `Pipeline.process` does for a pair:
   * same outputs, alarms and block-split invariance, the level being the power-normalised radius, plus the power
   * and the low-power alarm.
   */
  process(channels: readonly SampleArray[], length: number, output: ChannelPipelineOutput, events: AlarmEvent[]): number;
  markGap(lostSamples: number): void;
  reReference(atSampleIndex?: number): void;
  setChannels(channels: readonly ChannelParameters[]): void;
  setRefractiveIndex(refractiveIndex: number): void;
  reset(): void;
  readonly nextSampleIndex: number;
  readonly speedLimits: Pipeline['speedLimits'];
  readonly countLost: boolean;
  readonly stages: Pipeline['stages'] & { readonly combiner: ChannelCombiner };
  /** The power-normalised pair of the latest block (u = cos φ, v = sin φ on the model): views valid until the next call. */
  readonly pair: { readonly u: Float64Array; readonly v: Float64Array };
}

/**
 * The signal chain for 3 or 4 outputs per axis: combiner → correction (identity: the pair is already on the unit
 * circle) → monitor → tracker → displacement. Saturation is judged on the raw outputs by the combiner.
 */
export function createChannelPipeline(options: ChannelPipelineOptions): ChannelPipeline {
  const { channels, lowPowerLevel, lowPowerClearLevel, clearHoldSamples, adc, ...rest } = options;
  const combiner = createChannelCombiner({ channels, adc, lowPowerLevel, lowPowerClearLevel, clearHoldSamples });
  // The pair is radius 1 by construction; no finite value of it saturates.
  const pipeline = createPipeline({ ...rest, clearHoldSamples, adc: { kind: 'float', fullScale: Number.MAX_VALUE }, calibration: null });
  let capacity = 0;
  let u = new Float64Array(0);
  let v = u;
  let bits = new Uint8Array(0);
  function allocate(length: number): void {
    capacity = length;
    u = new Float64Array(length);
    v = new Float64Array(length);
    bits = new Uint8Array(length);
  }
  allocate(integerInRange('blockCapacity', options.blockCapacity ?? 4096, 1, 2 ** 28));

  function process(inputs: readonly SampleArray[], length: number, output: ChannelPipelineOutput, events: AlarmEvent[]): number {
    if (inputs.length !== combiner.channels.length) {
      throw new OptionError('channels', `${combiner.channels.length} sample arrays, one per output`, inputs.length);
    }
    if (length > capacity) allocate(length);
    const firstEvent = events.length;
    const firstIndex = pipeline.nextSampleIndex;
    bits.fill(0, 0, length);
    combiner.process(inputs, length, u, v, output.power, bits, firstIndex, events);
    pipeline.process(u, v, length, output, events);
    const flags = output.flags;
    for (let i = 0; i < length; i++) flags[i] |= bits[i]!;
    if (events.length - firstEvent > 1) {
      const added = events.splice(firstEvent);
      added.sort((a, b) => a.sampleIndex - b.sampleIndex);
      for (const event of added) events.push(event);
    }
    return length;
  }

  return {
    process,
    markGap: (lostSamples) => pipeline.markGap(lostSamples),
    reReference: (atSampleIndex) => pipeline.reReference(atSampleIndex),
    setChannels: (next) => combiner.setChannels(next),
    setRefractiveIndex: (refractiveIndex) => pipeline.setRefractiveIndex(refractiveIndex),
    reset() {
      combiner.reset();
      pipeline.reset();
    },
    get nextSampleIndex() {
      return pipeline.nextSampleIndex;
    },
    get speedLimits() {
      return pipeline.speedLimits;
    },
    get countLost() {
      return pipeline.countLost;
    },
    stages: { ...pipeline.stages, combiner },
    get pair() {
      return { u, v };
    },
  };
}
