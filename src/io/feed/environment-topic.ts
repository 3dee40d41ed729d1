// Air conditions that change during a run, read from an MQTT topic a sensor publishes to: the same schedules the
// followed environment log gives (`followEnvironmentLog`), so the chain takes them the same way (the index set per
// block rescales the reading, never the count). A broker that is down or goes away stops nothing: the latest
// reading holds, the link retries with a doubling wait and reports each outage.

import { Observable } from 'rxjs';
import { createEnvironmentSchedule, DEFAULT_CO2_PPM, finiteNumber, OptionError, type EnvironmentRecord, type EnvironmentSchedule } from '../../core/index.js';
import { openMqttLink, resolveMqttConnection, warnMqttEvents, type MqttConnectionOptions, type MqttLinkEvent } from './mqtt-link.js';

/**
 * One reading as a sensor publishes it: a JSON object `{"temperatureC": 20.4, "pressurePa": 101310,
 * "relativeHumidityPct": 45, "co2Ppm": 430}` (co2Ppm optional). Other fields are ignored.
 */
export interface EnvironmentReading {
  /** Air temperature, °C. */
  readonly temperatureC: number;
  /** Air pressure, Pa. */
  readonly pressurePa: number;
  /** Relative humidity, %. */
  readonly relativeHumidityPct: number;
  /** CO2 mole fraction, µmol/mol. Absent: the one in force holds (`DEFAULT_CO2_PPM` when none was ever given). */
  readonly co2Ppm?: number;
}

/** Largest payload read, bytes: a reading is a few dozen. */
const MAX_READING_BYTES = 1024;

/**
 * The reading in a message's payload; throws an Error saying what a reading is (the topic named) for anything
 * else. Plausible ranges are the index equation's business (it warns outside its validity).
 */
export function parseEnvironmentMessage(payload: string | Uint8Array, topic: string): EnvironmentReading {
  const expected = `${topic}: a reading is a JSON object {"temperatureC":…,"pressurePa":…,"relativeHumidityPct":…[,"co2Ppm":…]} of at most ${MAX_READING_BYTES} bytes`;
  if (payload.length > MAX_READING_BYTES) throw new Error(`${expected} (got ${payload.length} bytes)`);
  const text = typeof payload === 'string' ? payload : new TextDecoder().decode(payload);
  let parsed: unknown;
  try {
    parsed = JSON.parse(text);
  } catch {
    throw new Error(`${expected} (got ${JSON.stringify(text.slice(0, 80))})`);
  }
  if (parsed === null || typeof parsed !== 'object' || Array.isArray(parsed)) throw new Error(`${expected} (got ${JSON.stringify(text.slice(0, 80))})`);
  const record = parsed as Record<string, unknown>;
  const field = (name: string): number => {
    const value = record[name];
    if (typeof value !== 'number' || !Number.isFinite(value)) throw new Error(`${expected}: ${name} must be a finite number (got ${JSON.stringify(value) ?? 'nothing'})`);
    return value;
  };
  return {
    temperatureC: field('temperatureC'),
    pressurePa: field('pressurePa'),
    relativeHumidityPct: field('relativeHumidityPct'),
    ...(record.co2Ppm === undefined ? {} : { co2Ppm: field('co2Ppm') }),
  };
}

/** What the topic tells its owner besides the link's own events: a reading taken, or a message refused. */
export type EnvironmentTopicEvent =
  | MqttLinkEvent
  | { readonly kind: 'reading'; readonly tS: number; readonly reading: EnvironmentReading }
  | { readonly kind: 'rejected'; readonly message: string };

export interface EnvironmentTopicOptions extends MqttConnectionOptions {
  /** The topic a sensor publishes its readings to (no wildcards). */
  readonly topic: string;
  /** The reading in force from t = 0 until the first message: the run's starting conditions. */
  readonly initial: EnvironmentReading;
  /** The run time, s, a reading takes effect at when it arrives (for a live chain: the latest sample it processed). */
  readonly timeS: () => number;
  /** Default: a process warning for the link's outages and for a refused message. */
  readonly onEvent?: (event: EnvironmentTopicEvent) => void;
}

/**
 * Follows the readings published to `topic`: subscribing connects (in the background) and emits at once the
 * schedule of the initial reading, then for each message the schedule of its reading, taking effect at `timeS()`
 * and held from there on. Never errors for the broker's or a message's sake: outages and refused messages go to
 * `onEvent`, which a summary can count; unsubscribing disconnects. Throws an OptionError for invalid options.
 */
export function followEnvironmentTopic(options: EnvironmentTopicOptions): Observable<EnvironmentSchedule> {
  const connection = resolveMqttConnection(options);
  const topic = options.topic;
  if (typeof topic !== 'string' || !/^[^#+\u0000]+$/.test(topic)) throw new OptionError('topic', 'an MQTT topic without + or # wildcards', topic);
  const first = recordOf(options.initial, 0, null, 'initial');
  if (typeof options.timeS !== 'function') throw new OptionError('timeS', 'a function', typeof options.timeS);
  const onEvent = options.onEvent ?? warnTopicEvents(connection.url);
  return new Observable<EnvironmentSchedule>((subscriber) => {
    // Only the latest reading is kept: a live chain asks for times after it arrived, where it holds; a sensor
    // publishing every second would otherwise make each schedule longer than the one before.
    let latest = first;
    subscriber.next(createEnvironmentSchedule([latest]));
    const link = openMqttLink(connection, {
      // A clean session forgets subscriptions: subscribe again on every connection.
      onConnect: () => link.client.subscribe(topic, { qos: 1 }),
      onEvent,
    });
    link.client.on('message', (received, payload) => {
      if (received !== topic || subscriber.closed) return;
      let reading: EnvironmentReading;
      try {
        reading = parseEnvironmentMessage(payload, topic);
      } catch (error) {
        onEvent({ kind: 'rejected', message: (error as Error).message });
        return;
      }
      latest = recordOf(reading, Math.max(latest.tS, options.timeS()), latest, 'reading');
      subscriber.next(createEnvironmentSchedule([latest]));
      onEvent({ kind: 'reading', tS: latest.tS, reading });
    });
    return () => void link.close();
  });
}

/** A reading as a schedule record at `tS`; without CO2 the one in force (`before`'s) holds. */
function recordOf(reading: EnvironmentReading, tS: number, before: EnvironmentRecord | null, name: string): EnvironmentRecord {
  return {
    tS,
    temperatureC: finiteNumber(`${name}.temperatureC`, reading.temperatureC),
    pressurePa: finiteNumber(`${name}.pressurePa`, reading.pressurePa),
    relativeHumidityPct: finiteNumber(`${name}.relativeHumidityPct`, reading.relativeHumidityPct),
    co2Ppm: reading.co2Ppm === undefined ? (before?.co2Ppm ?? DEFAULT_CO2_PPM) : finiteNumber(`${name}.co2Ppm`, reading.co2Ppm),
  };
}

function warnTopicEvents(url: string): (event: EnvironmentTopicEvent) => void {
  const link = warnMqttEvents(url, 'the latest reading holds');
  return (event) => {
    if (event.kind === 'rejected') process.emitWarning(`${event.message}; the latest reading holds`);
    else if (event.kind !== 'reading') link(event);
  };
}
