// `listen --environment-log FILE`: the air conditions a sensor appends to a CSV file during the run (the format
// replay reads), followed as the file grows; `listen --environment-topic TOPIC`: the readings a sensor publishes to
// an MQTT topic. The library reads them as schedules and computes the index (`followEnvironmentLog`,
// `followEnvironmentTopic`, `airIndexAt`); the chain sets it per block (`trackLink`'s `refractiveIndexAt`).
import type { Observable, Subscription } from 'rxjs';
import type { EnvironmentSchedule } from '../../src/core/index.js';
import { readEnvironmentLog } from '../../src/io/capture/index.js';
import { followEnvironmentLog } from '../../src/io/live/index.js';
import type { MqttConnectionOptions, MqttLinkHealth } from '../../src/io/feed/index.js';
import { UsageError } from '../cli-kit.js';
import { environmentLogIndex, equationOf, type Environment } from '../environment-options.js';
import { mqttEventLine } from './live-feed.js';

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

/** What the summary says of the environment topic: its readings and its broker link. */
export interface EnvironmentTopicSummary extends Omit<MqttLinkHealth, 'failedAttempts'> {
  readonly topic: string;
  readonly url: string;
  /** Readings taken (the starting conditions not counted), and messages refused. */
  readonly readings: number;
  readonly rejected: number;
  /** When the latest reading took effect, s of samples (0: still the starting conditions). */
  readonly lastReadingS: number;
  /** The reading in force at the end. */
  readonly latest: { readonly temperatureC: number; readonly pressurePa: number; readonly relativeHumidityPct: number; readonly co2Ppm: number };
}

export interface LiveEnvironmentTopic {
  readonly indexAt: (tS: number) => number;
  start(log: (line: string) => void): void;
  stop(): void;
  summary(): EnvironmentTopicSummary;
  /** The line for the end of the run. */
  finalLine(): string;
}

/**
 * `--environment-topic TOPIC` on the broker of --mqtt (its URL, credentials and TLS): the fixed air conditions are
 * the reading until the first message; null without the option. Checked before the port opens. The MQTT client
 * is loaded only here: a listen without the option does not load the mqtt package.
 */
export async function openEnvironmentTopic(
  values: Record<string, unknown>,
  lengthScale: { readonly wavelengthM: number },
  environment: Environment,
  mqtt: MqttConnectionOptions | null,
  notes: string[],
): Promise<LiveEnvironmentTopic | null> {
  const topic = values['environment-topic'] as string | undefined;
  if (topic === undefined) return null;
  if (values['environment-log'] !== undefined) throw new UsageError('give either --environment-log or --environment-topic, not both');
  if (mqtt === null) throw new UsageError('--environment-topic reads from the broker of --mqtt: give --mqtt URL');
  const air = environment.air;
  if (air === null || air.relativeHumidityPct === undefined) {
    throw new UsageError('--environment-topic needs the starting air conditions, in force until the first reading: --temperature-c, --pressure-pa and --humidity-pct');
  }
  const equation = equationOf(values);
  const { followEnvironmentTopic } = await import('../../src/io/feed/environment-topic.js');
  const url = mqtt.url!;
  let schedule: EnvironmentSchedule | null = null;
  let readings = 0;
  let rejected = 0;
  let latestTimeS = 0;
  let log: (line: string) => void = (line) => notes.push(line);
  const indexOf = environmentLogIndex(`environment topic ${topic}`, () => schedule!, lengthScale.wavelengthM, equation, (line) => log(line));
  // The chain asks for the index of each block as it goes: the latest time asked is where a new reading takes effect.
  const indexAt = (tS: number) => {
    latestTimeS = tS;
    return indexOf(tS);
  };
  let subscription: Subscription | null = null;
  // The link's figures as its events tell them (the library's link keeps them to itself).
  let connected = false;
  let connections = 0;
  let outages = 0;
  let lastError: string | null = null;
  let outageSince: number | null = null;
  let outageMsDone = 0;
  const schedules$: Observable<EnvironmentSchedule> = followEnvironmentTopic({
    ...mqtt,
    topic,
    initial: { temperatureC: air.temperatureC, pressurePa: air.pressurePa, relativeHumidityPct: air.relativeHumidityPct, ...(air.co2Ppm === undefined ? {} : { co2Ppm: air.co2Ppm }) },
    timeS: () => latestTimeS,
    onEvent(event) {
      const now = performance.now();
      if (event.kind === 'reading') {
        readings++;
        const { reading } = event;
        if (readings <= MAX_READING_LINES) {
          log(
            `environment topic ${topic}: reading at t = ${event.tS.toFixed(6)} s (${reading.temperatureC} °C, ${reading.pressurePa} Pa, ${reading.relativeHumidityPct} %` +
              `${reading.co2Ppm === undefined ? '' : `, ${reading.co2Ppm} µmol/mol CO2`}): refractive index ${indexOf(event.tS).toFixed(10)} from the next block of samples on`,
          );
        } else if (readings === MAX_READING_LINES + 1) log(`environment topic ${topic}: further readings are taken, not listed`);
        return;
      }
      if (event.kind === 'rejected') {
        rejected++;
        log(`environment topic: ${event.message}; the latest reading holds`);
        return;
      }
      if (event.kind === 'connected') {
        if (outageSince !== null) outageMsDone += now - outageSince;
        outageSince = null;
        connected = true;
        connections++;
      } else {
        if (event.kind === 'down') {
          outageSince = now;
          connected = false;
          outages++;
        }
        lastError = event.message;
      }
      log(`environment topic ${topic}: ${mqttEventLine(url, event, 'the latest reading holds')}`);
    },
  });
  notes.push(
    `environment topic ${topic} at ${url}: the air given (${air.temperatureC} °C, ${air.pressurePa} Pa, ${air.relativeHumidityPct} %) until the first reading, ` +
      `then each reading from the next block of samples on (${equation}); no uncertainty budget (it needs fixed air conditions)`,
  );
  const health = () => ({
    connected,
    connections,
    outages,
    outageMs: outageMsDone + (outageSince === null ? 0 : performance.now() - outageSince),
    lastError,
  });
  return {
    indexAt,
    start(logLine) {
      log = logLine;
      subscription = schedules$.subscribe((next) => (schedule = next));
    },
    stop() {
      subscription?.unsubscribe();
    },
    summary() {
      const latest = schedule?.records.at(-1);
      return {
        topic,
        url,
        readings,
        rejected,
        lastReadingS: latest?.tS ?? 0,
        latest: {
          temperatureC: latest?.temperatureC ?? air.temperatureC,
          pressurePa: latest?.pressurePa ?? air.pressurePa,
          relativeHumidityPct: latest?.relativeHumidityPct ?? air.relativeHumidityPct!,
          co2Ppm: latest?.co2Ppm ?? Number.NaN,
        },
        ...health(),
      };
    },
    finalLine() {
      const h = health();
      const outage = h.outages === 0 ? 'no broker outage' : `${h.outages} broker outage(s), ${(h.outageMs / 1000).toFixed(1)} s without the broker${h.connections === 0 ? ' (never connected)' : ''}: the latest reading held meanwhile`;
      return `environment topic ${topic}: ${readings} reading(s) taken, ${rejected} refused; ${outage}`;
    },
  };
}
