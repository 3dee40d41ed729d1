// Air conditions that change during a run: a log of timed readings, interpolated linearly in time, held at the
// first and last reading outside it. The index of air from them rescales the reading, never the fringe count.

import { OptionError } from '../options.js';
import { DEFAULT_AIR_INDEX_EQUATION, refractiveIndexOfAir, type AirIndexEquation, type AirIndexResult } from './air-index.js';

/** One reading of the air sensors. */
export interface EnvironmentRecord {
  /** Time of the reading from the start of the samples, s. */
  readonly tS: number;
  readonly temperatureC: number;
  readonly pressurePa: number;
  readonly relativeHumidityPct: number;
  /** CO2 mole fraction, µmol/mol; NaN when the log has none (the index equation's default applies). */
  readonly co2Ppm: number;
}

export interface EnvironmentSchedule {
  /** The readings, in time order. */
  readonly records: readonly EnvironmentRecord[];
  /** True when the log carries CO2. */
  readonly hasCo2: boolean;
  /** Conditions at `tS`: linear between the readings around it, the first or last reading outside the log. */
  at(tS: number): EnvironmentRecord;
}

/**
 * Checks the readings (finite values, times strictly increasing, at least one) and returns the schedule. Errors
 * name the record: `records[3].tS must be greater than records[2].tS (got 1.5 after 1.5)`.
 */
export function createEnvironmentSchedule(records: readonly EnvironmentRecord[]): EnvironmentSchedule {
  if (records.length === 0) throw new OptionError('records', 'at least one reading', 0);
  const hasCo2 = !Number.isNaN(records[0]!.co2Ppm);
  records.forEach((record, i) => {
    for (const key of ['tS', 'temperatureC', 'pressurePa', 'relativeHumidityPct'] as const) {
      if (!Number.isFinite(record[key])) throw new OptionError(`records[${i}].${key}`, 'a finite number', record[key]);
    }
    if (hasCo2 ? !Number.isFinite(record.co2Ppm) : !Number.isNaN(record.co2Ppm)) {
      throw new OptionError(`records[${i}].co2Ppm`, hasCo2 ? 'a finite number (the first reading has CO2)' : 'NaN (the first reading has no CO2)', record.co2Ppm);
    }
    if (i > 0 && !(record.tS > records[i - 1]!.tS)) {
      throw new OptionError(`records[${i}].tS`, `greater than records[${i - 1}].tS = ${records[i - 1]!.tS}`, record.tS);
    }
  });
  const frozen = Object.freeze(records.map((record) => Object.freeze({ ...record })));
  let cursor = 0; // the reading at or before the last time asked: runs ask in time order
  return {
    records: frozen,
    hasCo2,
    at(tS) {
      const last = frozen.length - 1;
      if (!(tS > frozen[0]!.tS)) return frozen[0]!;
      if (tS >= frozen[last]!.tS) return frozen[last]!;
      if (frozen[cursor]!.tS > tS) cursor = 0;
      while (frozen[cursor + 1]!.tS <= tS) cursor++;
      const a = frozen[cursor]!;
      const b = frozen[cursor + 1]!;
      const w = (tS - a.tS) / (b.tS - a.tS);
      const mix = (p: number, q: number) => p + w * (q - p);
      return {
        tS,
        temperatureC: mix(a.temperatureC, b.temperatureC),
        pressurePa: mix(a.pressurePa, b.pressurePa),
        relativeHumidityPct: mix(a.relativeHumidityPct, b.relativeHumidityPct),
        co2Ppm: mix(a.co2Ppm, b.co2Ppm),
      };
    },
  };
}

/**
 * The index of air for the conditions the schedule gives at `tS` (interpolated as `at` does), with the equation's
 * validity warnings: what a run sets per block of samples, replayed or live.
 */
export function airIndexAt(schedule: EnvironmentSchedule, tS: number, options: { readonly vacuumWavelengthM: number; readonly equation?: AirIndexEquation }): AirIndexResult {
  const air = schedule.at(tS);
  return refractiveIndexOfAir({
    temperatureC: air.temperatureC,
    pressurePa: air.pressurePa,
    relativeHumidityPct: air.relativeHumidityPct,
    ...(Number.isNaN(air.co2Ppm) ? {} : { co2Ppm: air.co2Ppm }),
    vacuumWavelengthM: options.vacuumWavelengthM,
    equation: options.equation ?? DEFAULT_AIR_INDEX_EQUATION,
  });
}
