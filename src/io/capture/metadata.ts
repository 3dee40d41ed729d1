// The `# key: value` metadata convention of capture files and the keys the readers interpret (rate, ADC code range).
import { CaptureFormatError } from './errors.js';
import type { AdcFormat } from '../../core/index.js';

/** Metadata key for the sample rate in Hz. */
export const RATE_KEY = 'rate_hz';
/** Metadata key for the converter format: `int<bits>` (signed), `uint<bits>` (unsigned) or `float`. */
export const ADC_KEY = 'adc';
/** Metadata key for the full scale of a `float` converter (samples span -full..+full); default 1. */
export const ADC_FULL_SCALE_KEY = 'adc_full_scale';

const METADATA_LINE = /^#\s*([A-Za-z][A-Za-z0-9_.-]*)\s*:\s*(.*?)\s*$/;

/** Splits `# key: value` into its parts; any other `#` line is a plain comment and gives null. */
export function parseMetadataLine(text: string): [key: string, value: string] | null {
  const match = METADATA_LINE.exec(text);
  return match === null ? null : [match[1]!, match[2]!];
}

/** Where a metadata value was read, so a bad value can be reported at its line (CSV) or byte offset (WAV). */
export interface MetadataPlace {
  readonly file: string;
  readonly line?: number;
  readonly byteOffset?: number;
}

export function parseRateMetadata(value: string, place: MetadataPlace): number {
  const rate = Number(value);
  if (value === '' || !Number.isFinite(rate) || rate <= 0) {
    throw new CaptureFormatError({ ...place, expected: `"${RATE_KEY}" to be a positive number of Hz`, got: value });
  }
  return rate;
}

const ADC_VALUE = /^(u?)int([0-9]{1,2})$/;

/** The code range named by the `adc` (and `adc_full_scale`) metadata; null when `adc` is absent. */
export function parseAdcMetadata(metadata: ReadonlyMap<string, string>, place: MetadataPlace): AdcFormat | null {
  const format = metadata.get(ADC_KEY);
  if (format === undefined) return null;
  if (format === 'float') {
    const text = metadata.get(ADC_FULL_SCALE_KEY) ?? '1';
    const fullScale = Number(text);
    if (text === '' || !Number.isFinite(fullScale) || fullScale <= 0) {
      throw new CaptureFormatError({ ...place, expected: `"${ADC_FULL_SCALE_KEY}" to be a positive number`, got: text });
    }
    return { kind: 'float', fullScale };
  }
  const match = ADC_VALUE.exec(format);
  const bits = match === null ? 0 : Number(match[2]);
  const unsigned = match !== null && match[1] === 'u';
  if (match === null || bits < (unsigned ? 1 : 2) || bits > 32) {
    throw new CaptureFormatError({
      ...place,
      expected: `"${ADC_KEY}" to be int<bits> (2..32), uint<bits> (1..32) or float`,
      got: format,
    });
  }
  return integerAdc(unsigned ? 'unsigned' : 'signed', bits);
}

/**
 * An integer converter of `bits` bits as the core's saturation check takes it: signed 16 bits is `int16`, unsigned
 * is offset binary, and other signed widths are a symmetric full scale at their largest code, so both extreme codes
 * read as saturated.
 */
export function integerAdc(kind: 'signed' | 'unsigned', bits: number): AdcFormat {
  if (kind === 'unsigned') return { kind: 'unsigned', bits };
  return bits === 16 ? { kind: 'int16' } : { kind: 'float', fullScale: 2 ** (bits - 1) - 1 };
}
