// The environment log of a run: CSV with a header naming the columns t (s), temperature (°C), pressure (Pa),
// humidity (% relative) and optionally co2 (µmol/mol), one reading per line. See docs/capture-formats.md.

import { readFile } from 'node:fs/promises';
import { createEnvironmentSchedule, type EnvironmentRecord, type EnvironmentSchedule } from '../../core/index.js';
import { CaptureFormatError } from './errors.js';

const REQUIRED = ['t', 'temperature', 'pressure', 'humidity'] as const;
const OPTIONAL = ['co2'] as const;
const HEADER_HINT = 'a header naming the columns t,temperature,pressure,humidity[,co2]';

/** Parses the text of an environment log; `file` names it in errors. Lines starting with # and blank lines are skipped. */
export function parseEnvironmentLog(text: string, file: string): EnvironmentSchedule {
  const lines = text.split('\n');
  let columns: string[] | null = null;
  const records: EnvironmentRecord[] = [];
  for (let i = 0; i < lines.length; i++) {
    const line = lines[i]!.replace(/\r$/, '');
    const trimmed = line.trim();
    if (trimmed === '' || trimmed.startsWith('#')) continue;
    const fields = trimmed.split(',').map((field) => field.trim());
    if (columns === null) {
      const known = [...REQUIRED, ...OPTIONAL] as readonly string[];
      const unknown = fields.find((name) => !known.includes(name));
      const missing = REQUIRED.find((name) => !fields.includes(name));
      if (unknown !== undefined || missing !== undefined || new Set(fields).size !== fields.length) {
        throw new CaptureFormatError({ file, line: i + 1, expected: HEADER_HINT, got: line });
      }
      columns = fields;
      continue;
    }
    if (fields.length !== columns.length) {
      throw new CaptureFormatError({ file, line: i + 1, expected: `${columns.length} numbers (${columns.join(',')})`, got: line });
    }
    const value = (name: string) => {
      const at = columns!.indexOf(name);
      if (at < 0) return Number.NaN;
      const field = fields[at]!;
      const number = field === '' ? Number.NaN : Number(field);
      if (!Number.isFinite(number)) throw new CaptureFormatError({ file, line: i + 1, expected: `a finite number for ${name}`, got: field });
      return number;
    };
    const tS = value('t');
    if (records.length > 0 && !(tS > records[records.length - 1]!.tS)) {
      throw new CaptureFormatError({ file, line: i + 1, expected: `t greater than the line before (${records[records.length - 1]!.tS} s)`, got: String(tS) });
    }
    records.push({ tS, temperatureC: value('temperature'), pressurePa: value('pressure'), relativeHumidityPct: value('humidity'), co2Ppm: value('co2') });
  }
  if (columns === null) throw new CaptureFormatError({ file, line: lines.length, expected: HEADER_HINT, got: '' });
  if (records.length === 0) throw new CaptureFormatError({ file, line: lines.length, expected: 'at least one reading after the header', got: '' });
  return createEnvironmentSchedule(records);
}

/** Reads an environment log file; errors name the file and the line. */
export async function readEnvironmentLog(path: string): Promise<EnvironmentSchedule> {
  let text: string;
  try {
    text = await readFile(path, 'utf8');
  } catch (error) {
    throw new Error(`${path}: cannot read the environment log (${(error as Error).message})`);
  }
  return parseEnvironmentLog(text, path);
}
