// Options shared by the commands that read captures and measure: channel selection and the length scale.
import type { UnwrapMethod } from '../src/core/index.js';
import type { OpenCaptureOptions } from '../src/io/capture/index.js';
import { numberOption, UsageError } from './cli-kit.js';

export const captureOptionSpecs = {
  channels: { type: 'string' },
  'x-channel': { type: 'string' },
  'y-channel': { type: 'string' },
  'time-column': { type: 'string' },
  'rate-hz': { type: 'string' },
} as const;

export const captureOptionHelp = `Capture options:
  --channels A,B[,C[,D]] the 2 to 4 detector outputs of the axis, by column (CSV) or channel (WAV) name or
                         1-based number (default x,y). Three or four DC-coupled outputs: the source power is
                         removed sample by sample and reported, with its own low_power alarm
  --x-channel NAME|N    column (CSV) or channel (WAV) of x, by name or 1-based number (default: x / channel 1)
  --y-channel NAME|N    column or channel of y (default: y / channel 2)
  --time-column NAME|N  CSV time column in seconds (default: t when present); "none" ignores it
  --rate-hz R           sample rate, Hz, for CSV files without a t column or rate_hz metadata`;

export const analysisThreadOptionSpecs = {
  'analysis-thread': { type: 'string' },
} as const;

export const analysisThreadOptionHelp = `  --analysis-thread auto|on|off
                         run the analyses (periodic error, radius residual, calibration_stale, the report's
                         series) on a second thread beside the pipeline: the same results, sooner on two cores
                         (default auto: on for captures of 2^22 samples or more on a machine with two cores)`;

/** --analysis-thread: true, false or 'auto'. */
export function analysisThreadOf(values: Record<string, string | boolean | undefined>): boolean | 'auto' {
  const value = (values['analysis-thread'] as string | undefined) ?? 'auto';
  if (value === 'auto') return 'auto';
  if (value === 'on' || value === 'off') return value === 'on';
  throw new UsageError(`--analysis-thread takes auto, on or off (got "${value}")`);
}

export const measureOptionSpecs = {
  'wavelength-nm': { type: 'string' },
  fold: { type: 'string' },
  'refractive-index': { type: 'string' },
  'bandwidth-hz': { type: 'string' },
  unwrap: { type: 'string' },
} as const;

export const measureOptionHelp = `Measurement options:
  --wavelength-nm L      vacuum wavelength, nm (e.g. 632.9908, unstabilised He-Ne)
  --fold N               optical fold: 2 single pass (retroreflector), 4 double-pass plane mirror
  --refractive-index n   refractive index of air on the path (default 1: the vacuum wavelength is used as is)
  --bandwidth-hz B       velocity loop bandwidth, Hz (default rate/100)
  --unwrap MODE          plain (default: steps under half a fringe per sample) or velocity-aided (up to
                         0.9 fringe per sample while the acceleration stays within the loop's bound, see docs)`;

function selector(text: string): string | number {
  return /^[0-9]+$/.test(text) ? Number(text) : text;
}

export function captureOptionsOf(values: Record<string, string | boolean | undefined>): OpenCaptureOptions {
  const text = (name: string) => values[name] as string | undefined;
  const timeColumn = text('time-column');
  const rateHz = numberOption('rate-hz', text('rate-hz'));
  const channels = text('channels');
  if (channels !== undefined) {
    const list = channels.split(',').map((entry) => entry.trim());
    if (list.length < 2 || list.length > 4 || list.some((entry) => entry === '')) {
      throw new UsageError(`--channels takes 2 to 4 column names or 1-based numbers separated by commas (got "${channels}")`);
    }
    if (text('x-channel') !== undefined || text('y-channel') !== undefined) {
      throw new UsageError('--channels names x and y itself (its first two entries): give it or --x-channel/--y-channel, not both');
    }
    return {
      channels: list.map(selector),
      ...(timeColumn === undefined ? {} : { timeColumn: timeColumn === 'none' ? null : selector(timeColumn) }),
      ...(rateHz === undefined ? {} : { rateHz }),
    };
  }
  return {
    ...(text('x-channel') === undefined ? {} : { xChannel: selector(text('x-channel')!) }),
    ...(text('y-channel') === undefined ? {} : { yChannel: selector(text('y-channel')!) }),
    ...(timeColumn === undefined ? {} : { timeColumn: timeColumn === 'none' ? null : selector(timeColumn) }),
    ...(rateHz === undefined ? {} : { rateHz }),
  };
}

export interface LengthScale {
  readonly wavelengthM: number;
  readonly fold: number;
  /** As given on the command line; undefined when the environment (or the default n = 1) decides. */
  readonly refractiveIndex: number | undefined;
  readonly bandwidthHz?: number;
  readonly unwrap?: UnwrapMethod;
  /** Lines telling the user which defaults were used. */
  readonly notes: readonly string[];
}

/** The length scale from the options; `required` lists the options that have no default for this command. */
export function lengthScaleOf(
  values: Record<string, string | boolean | undefined>,
  defaults: { wavelengthNm?: number; fold?: number },
): LengthScale {
  const notes: string[] = [];
  const wavelengthNm = numberOption('wavelength-nm', values['wavelength-nm'] as string | undefined);
  const fold = numberOption('fold', values.fold as string | undefined);
  const refractiveIndex = numberOption('refractive-index', values['refractive-index'] as string | undefined);
  const bandwidthHz = numberOption('bandwidth-hz', values['bandwidth-hz'] as string | undefined);
  const unwrap = values.unwrap as string | undefined;
  if (unwrap !== undefined && unwrap !== 'plain' && unwrap !== 'velocity-aided') {
    throw new UsageError(`--unwrap must be plain or velocity-aided (got "${unwrap}")`);
  }
  const resolvedWavelength = wavelengthNm ?? defaults.wavelengthNm;
  const resolvedFold = fold ?? defaults.fold;
  if (resolvedWavelength === undefined) throw new UsageError('--wavelength-nm is required');
  if (resolvedFold === undefined) throw new UsageError('--fold is required');
  if (wavelengthNm === undefined) notes.push(`vacuum wavelength not given: using ${resolvedWavelength} nm (unstabilised He-Ne)`);
  if (fold === undefined) notes.push(`fold not given: using ${resolvedFold}`);
  return {
    wavelengthM: resolvedWavelength * 1e-9,
    fold: resolvedFold,
    refractiveIndex,
    ...(bandwidthHz === undefined ? {} : { bandwidthHz }),
    ...(unwrap === undefined ? {} : { unwrap }),
    notes,
  };
}
