// Options of openCapture after validation, with defaults filled in; shared by the CSV and WAV readers.
import { integerInRange, MAX_COUNT, OptionError, positiveFinite } from '../../core/options.js';
import type { CaptureFormat, ChannelSelector, OpenCaptureOptions } from './types.js';

export const DEFAULT_BLOCK_SIZE = 4096;
export const MAX_BLOCK_SIZE = 1_048_576;
export const DEFAULT_READ_CHUNK_BYTES = 262_144;
export const MAX_READ_CHUNK_BYTES = 67_108_864;

export interface ResolvedCaptureOptions {
  readonly format: CaptureFormat | null;
  readonly xChannel: ChannelSelector | null;
  readonly yChannel: ChannelSelector | null;
  /** Outputs 3 and 4 of `channels`, when given. */
  readonly extraChannels: readonly ChannelSelector[];
  /** undefined: use `t` when present; null: use none. */
  readonly timeColumn: ChannelSelector | null | undefined;
  readonly rateHz: number | null;
  readonly blockSize: number;
  readonly readChunkBytes: number;
  readonly startSample: number;
  /** null: to the end. */
  readonly sampleCount: number | null;
  readonly int16Blocks: boolean;
}

export function resolveCaptureOptions(options: OpenCaptureOptions): ResolvedCaptureOptions {
  if (options.format !== undefined && options.format !== 'csv' && options.format !== 'wav') {
    throw new OptionError('format', '"csv" or "wav"', options.format);
  }
  const channels = options.channels;
  if (channels !== undefined) {
    if (!Array.isArray(channels) || channels.length < 2 || channels.length > 4) {
      throw new OptionError('channels', 'a list of 2 to 4 column names or 1-based numbers', channels);
    }
    if (options.xChannel !== undefined || options.yChannel !== undefined) {
      throw new OptionError('channels', 'left out when xChannel or yChannel is given (its first two entries name x and y)', channels);
    }
  }
  return Object.freeze({
    format: options.format ?? null,
    xChannel: checkSelector('xChannel', channels?.[0] ?? options.xChannel),
    yChannel: checkSelector('yChannel', channels?.[1] ?? options.yChannel),
    extraChannels: Object.freeze((channels ?? []).slice(2).map((selector, index) => checkSelector(`channels[${index + 2}]`, selector)!)),
    timeColumn: options.timeColumn === null ? null : (checkSelector('timeColumn', options.timeColumn) ?? undefined),
    rateHz: options.rateHz === undefined ? null : positiveFinite('rateHz', options.rateHz),
    blockSize: integerInRange('blockSize', options.blockSize ?? DEFAULT_BLOCK_SIZE, 1, MAX_BLOCK_SIZE),
    readChunkBytes: integerInRange('readChunkBytes', options.readChunkBytes ?? DEFAULT_READ_CHUNK_BYTES, 1, MAX_READ_CHUNK_BYTES),
    startSample: integerInRange('startSample', options.startSample ?? 0, 0, MAX_COUNT),
    sampleCount: options.sampleCount === undefined ? null : integerInRange('sampleCount', options.sampleCount, 0, MAX_COUNT),
    int16Blocks: booleanOption('int16Blocks', (options as { int16Blocks?: unknown }).int16Blocks ?? false),
  });
}

function booleanOption(name: string, value: unknown): boolean {
  if (typeof value !== 'boolean') throw new OptionError(name, 'true or false', value);
  return value;
}

function checkSelector(name: string, value: ChannelSelector | undefined): ChannelSelector | null {
  if (value === undefined) return null;
  if (typeof value === 'number') return integerInRange(name, value, 1, 65535);
  if (typeof value !== 'string' || value === '') {
    throw new OptionError(name, 'a column name or a 1-based column number', value);
  }
  return value;
}
