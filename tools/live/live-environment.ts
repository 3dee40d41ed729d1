// `listen --environment-log FILE`: the air conditions a sensor appends to a CSV file during the run (the format
// replay reads), followed as the file grows. The library reads and interpolates the log and computes the index
// (`followEnvironmentLog`, `airIndexAt`); the chain sets it per block (`trackLink`'s `refractiveIndexAt`).
import type { Subscription } from 'rxjs';
import type { EnvironmentSchedule } from '../../src/core/index.js';
import { followEnvironmentLog, readEnvironmentLog } from '../../src/io/capture/index.js';
import { UsageError } from '../cli-kit.js';
import { environmentLogIndex, equationOf, type Environment } from '../environment-options.js';

/** New readings logged one by one; later ones only counted (a sensor logging every second would flood stderr). */
const MAX_READING_LINES = 20;

export interface LiveEnvironmentLog {
  /** The index at a sample time, from the latest readings. */
  readonly indexAt: (tS: number) => number;
  /** Starts following the file; `log` gets each new reading (the first 20) and a failure to read on. */
  start(log: (line: string) => void): void;
  stop(): void;
  /** For the summary. */
  summary(): { path: string; readings: number; lastReadingS: number; error: string | null };
}

/** Reads the log as it is now (at least one reading: checked before the port opens), or null without the option. */
export async function openEnvironmentLog(
  values: Record<string, unknown>,
  lengthScale: { readonly wavelengthM: number; readonly refractiveIndex?: number | undefined },
  environment: Environment,
  notes: string[],
): Promise<LiveEnvironmentLog | null> {
  const path = values['environment-log'] as string | undefined;
  if (path === undefined) return null;
  if (environment.air !== null || lengthScale.refractiveIndex !== undefined) {
    throw new UsageError('give either --environment-log or fixed air conditions (--temperature-c … or --refractive-index), not both');
  }
  const equation = equationOf(values);
  let schedule: EnvironmentSchedule = await readEnvironmentLog(path);
  let error: string | null = null;
  let subscription: Subscription | null = null;
  // Until listen logs: warnings of the readings already there go with the notes.
  let log: (line: string) => void = (line) => notes.push(line);
  const indexAt = environmentLogIndex(path, () => schedule, lengthScale.wavelengthM, equation, (line) => log(line));
  const vacuumNote = notes.findIndex((note) => note.startsWith('no refractive index'));
  if (vacuumNote >= 0) notes.splice(vacuumNote, 1);
  notes.push(
    `environment log ${path}: ${schedule.records.length} reading(s) to t = ${schedule.records.at(-1)!.tS} s, refractive index ${indexAt(schedule.records.at(-1)!.tS).toFixed(10)} ` +
      `(${equation}); followed as it grows, set per block of samples; no uncertainty budget (it needs fixed air conditions)`,
  );
  return {
    indexAt,
    start(logLine) {
      log = logLine;
      subscription = followEnvironmentLog(path).subscribe({
        next(next) {
          const before = schedule.records.length;
          schedule = next;
          for (let k = before; k < next.records.length; k++) {
            if (k < MAX_READING_LINES) {
              const reading = next.records[k]!;
              log(
                `environment log ${path}: reading at t = ${reading.tS} s (${reading.temperatureC} °C, ${reading.pressurePa} Pa, ${reading.relativeHumidityPct} %): ` +
                  `refractive index ${indexAt(reading.tS).toFixed(10)}`,
              );
            } else if (k === MAX_READING_LINES) log(`environment log ${path}: further readings are followed, not listed`);
          }
        },
        error(failure: unknown) {
          error = (failure as Error).message;
          log(`environment log: ${error}; the index keeps following the ${schedule.records.length} reading(s) before it`);
        },
      });
    },
    stop() {
      subscription?.unsubscribe();
    },
    summary() {
      return { path, readings: schedule.records.length, lastReadingS: schedule.records.at(-1)!.tS, error };
    },
  };
}
