// Signal monitor: normalised level, and the low-signal, saturation and bad-sample alarms with hysteresis.

import { AlarmBit, pushAlarm, type AlarmEvent } from './alarms.js';
import { integerInRange, numberInRange, oneOf, positiveFinite } from './options.js';

/** How the ADC codes its samples; it sets where saturation begins. */
export type AdcFormat =
  /** Signed 16-bit two's complement: saturated at -32768 and 32767. */
  | { readonly kind: 'int16' }
  /** Offset-binary unsigned of `bits` bits (e.g. 12, 14, 16): saturated at 0 and 2^bits − 1. */
  | { readonly kind: 'unsigned'; readonly bits: number }
  /** Floating point with a stated full scale: saturated at or beyond ±fullScale. */
  | { readonly kind: 'float'; readonly fullScale: number };

export interface SignalMonitorOptions {
  /** ADC format of the raw samples. Default `{ kind: 'int16' }`. */
  readonly adc?: AdcFormat;
  /** Low-signal alarm raised when the level falls below this (fraction of the calibrated radius). Default 0.3; range (0, 1). */
  readonly lowSignalLevel?: number;
  /** Low-signal alarm clears only once the level is back at or above this. Default 0.4; range [lowSignalLevel, 1]. */
  readonly lowSignalClearLevel?: number;
  /** An alarm clears after this many consecutive good samples (hysteresis in time). Default 32; integer 1..2^31. */
  readonly clearHoldSamples?: number;
}

export interface SignalMonitor {
  /**
   * For `length` samples: writes `level` (corrected radius over calibrated radius, NaN for non-finite raw
   * samples), ORs the alarm bits active on each sample into `flags`, and pushes state changes onto `events`
   * with absolute indices starting at `firstIndex`. Never throws; allocates only when an alarm changes.
   */
  process(
    x: ArrayLike<number>,
    y: ArrayLike<number>,
    u: Float64Array,
    v: Float64Array,
    length: number,
    firstIndex: number,
    level: Float32Array,
    flags: Uint8Array,
    events: AlarmEvent[],
  ): number;
  reset(): void;
  readonly options: Readonly<Required<SignalMonitorOptions>>;
  /** ADC codes at or beyond which a sample is saturated. */
  readonly limits: { readonly low: number; readonly high: number };
  /** True while no alarm of this stage is active (a block can then take the fast path). */
  readonly quiet: boolean;
}

const ADC_KINDS = ['int16', 'unsigned', 'float'] as const;

/** The codes at or beyond which a sample is saturated; throws `OptionError` for a malformed format. */
export function adcLimits(adc: AdcFormat): { low: number; high: number } {
  // Checked first: a format from a file or a config may carry any kind.
  oneOf('adc.kind', adc.kind, ADC_KINDS);
  if (adc.kind === 'int16') return { low: -32768, high: 32767 };
  if (adc.kind === 'unsigned') return { low: 0, high: 2 ** integerInRange('adc.bits', adc.bits, 2, 32) - 1 };
  const fullScale = positiveFinite('adc.fullScale', adc.fullScale);
  return { low: -fullScale, high: fullScale };
}

/** The code of a zero signal: mid-scale of offset-binary converters, else 0. */
export function adcMidScale(adc: AdcFormat): number {
  return adc.kind === 'unsigned' ? 2 ** (adc.bits - 1) : 0;
}

export function createSignalMonitor(options: SignalMonitorOptions = {}): SignalMonitor {
  const adc = options.adc ?? { kind: 'int16' };
  const { low, high } = adcLimits(adc);
  const lowSignalLevel = numberInRange('lowSignalLevel', options.lowSignalLevel ?? 0.3, 0, 1, true);
  const lowSignalClearLevel = numberInRange(
    'lowSignalClearLevel',
    options.lowSignalClearLevel ?? Math.max(0.4, lowSignalLevel),
    lowSignalLevel,
    1,
  );
  const clearHoldSamples = integerInRange('clearHoldSamples', options.clearHoldSamples ?? 32, 1, 2 ** 31);
  const resolved = Object.freeze({ adc, lowSignalLevel, lowSignalClearLevel, clearHoldSamples });

  let lowActive = false;
  let lowRun = 0;
  let saturationActive = false;
  let saturationRun = 0;
  let badActive = false;
  let badRun = 0;


  function process(
    x: ArrayLike<number>,
    y: ArrayLike<number>,
    u: Float64Array,
    v: Float64Array,
    length: number,
    firstIndex: number,
    level: Float32Array,
    flags: Uint8Array,
    events: AlarmEvent[],
  ): number {
    const lowLevel = lowSignalLevel, clearLevel = lowSignalClearLevel, hold = clearHoldSamples;
    const lo = low, hi = high;
    if (!lowActive && !saturationActive && !badActive) {
      // Fast path while no alarm is active: levels only, until a sample needs attention. A non-finite sample
      // fails the level test (NaN) or the saturation test (±Infinity), so it always leaves this loop.
      let clean = true;
      for (let i = 0; i < length; i++) {
        const xi = x[i]!;
        const yi = y[i]!;
        const ui = u[i]!;
        const vi = v[i]!;
        const lev = Math.sqrt(ui * ui + vi * vi);
        if (!(lev >= lowLevel) || xi <= lo || xi >= hi || yi <= lo || yi >= hi) {
          clean = false;
          break;
        }
        level[i] = lev;
      }
      if (clean) return length;
    }
    for (let i = 0; i < length; i++) {
      const xi = x[i]!;
      const yi = y[i]!;
      // x − x is 0 for finite x and NaN for NaN and ±Infinity.
      const finite = xi - xi === 0 && yi - yi === 0;
      const ui = u[i]!;
      const vi = v[i]!;
      const lev = finite ? Math.sqrt(ui * ui + vi * vi) : NaN;
      level[i] = lev;
      let bits = 0;

      if (!finite) {
        badRun = 0;
        if (!badActive) {
          badActive = true;
          pushAlarm(events, firstIndex + i, 'badSample', true, NaN);
        }
      } else if (badActive && ++badRun >= hold) {
        badActive = false;
        pushAlarm(events, firstIndex + i, 'badSample', false, NaN);
      }
      if (badActive) bits |= AlarmBit.badSample;

      if (finite && (xi <= lo || xi >= hi || yi <= lo || yi >= hi)) {
        saturationRun = 0;
        if (!saturationActive) {
          saturationActive = true;
          pushAlarm(events, firstIndex + i, 'saturation', true, xi <= lo || xi >= hi ? xi : yi);
        }
      } else if (saturationActive && ++saturationRun >= hold) {
        saturationActive = false;
        pushAlarm(events, firstIndex + i, 'saturation', false, NaN);
      }
      if (saturationActive) bits |= AlarmBit.saturation;

      if (finite) {
        if (lev < lowLevel) {
          lowRun = 0;
          if (!lowActive) {
            lowActive = true;
            pushAlarm(events, firstIndex + i, 'lowSignal', true, lev);
          }
        } else if (lowActive) {
          if (lev < clearLevel) lowRun = 0;
          else if (++lowRun >= hold) {
            lowActive = false;
            pushAlarm(events, firstIndex + i, 'lowSignal', false, lev);
          }
        }
      }
      if (lowActive) bits |= AlarmBit.lowSignal;
      flags[i] |= bits;
    }
    return length;
  }

  function reset(): void {
    lowActive = false;
    lowRun = 0;
    saturationActive = false;
    saturationRun = 0;
    badActive = false;
    badRun = 0;
  }

  reset();
  return {
    process,
    reset,
    options: resolved,
    limits: { low, high },
    get quiet() {
      return !lowActive && !saturationActive && !badActive;
    },
  };
}
