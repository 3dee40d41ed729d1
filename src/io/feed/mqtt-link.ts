// One connection to an MQTT broker kept up in the background: the first connection and every reconnection, with a
// doubling wait between attempts, each outage reported once (then at most once per interval), and the figures a
// summary needs. The publisher (mqtt-publisher.ts) and the environment topic (environment-topic.ts) both use it;
// a broker that is down or goes away never stops their owner.

import { randomBytes } from 'node:crypto';
import { performance } from 'node:perf_hooks';
import mqtt, { type IClientOptions, type MqttClient } from 'mqtt';
import { integerInRange, OptionError } from '../../core/index.js';
import { DEFAULT_MQTT_URL } from './mqtt-defaults.js';

export interface MqttTlsOptions {
  /** CA certificate(s), PEM, for a broker with a private CA. Default: the system's CAs. */
  readonly ca?: string | Buffer;
  /** Client certificate and key, PEM, for brokers that require them. */
  readonly cert?: string | Buffer;
  readonly key?: string | Buffer;
  /** Check the broker's certificate. Default true; false only for tests against self-signed brokers. */
  readonly rejectUnauthorized?: boolean;
}

/** Where and how to connect: the options the publisher and the environment topic share. */
export interface MqttConnectionOptions {
  /** Broker URL: `mqtt://host:port` or `mqtts://host:port` (TLS). Default `mqtt://127.0.0.1:1883` (`DEFAULT_MQTT_URL`). */
  readonly url?: string;
  readonly username?: string;
  readonly password?: string;
  readonly tls?: MqttTlsOptions;
  /** Default `fringetally-` and 8 random hex digits. */
  readonly clientId?: string;
  /** Wait before the first retry after a failed or lost connection, ms; it doubles per failed attempt. Default 1000; 100..600000. */
  readonly reconnectPeriodMs?: number;
  /** Longest wait between retries, ms. Default 30000; at least `reconnectPeriodMs`, up to 3600000. */
  readonly maxReconnectPeriodMs?: number;
  /** One connection attempt gives up after this long, ms. Default 10000; 100..600000. */
  readonly connectTimeoutMs?: number;
  /** During an outage, `still-down` is reported at most once per this many ms. Default 60000; 1..86400000. */
  readonly reportIntervalMs?: number;
}

/** What a link tells its owner: the broker came (back), went away, or is still away. */
export type MqttLinkEvent =
  | { readonly kind: 'connected'; readonly first: boolean; readonly outageMs: number; readonly attempts: number }
  /** The first failure of an outage: the first connection failed, or a connection was lost. */
  | { readonly kind: 'down'; readonly message: string; readonly retryInMs: number }
  /** The outage goes on: at most one per `reportIntervalMs`, with the failed attempts since it began. */
  | { readonly kind: 'still-down'; readonly message: string; readonly attempts: number; readonly outageMs: number; readonly retryInMs: number };

/** A link's connection figures, for a summary. */
export interface MqttLinkHealth {
  readonly connected: boolean;
  /** Connections made (the first and every reconnection). */
  readonly connections: number;
  /** Outages begun (a failed first connection or a lost connection), and their total length so far, ms (the current one included). */
  readonly outages: number;
  readonly outageMs: number;
  /** Connection attempts that failed. */
  readonly failedAttempts: number;
  /** The last error the client reported, or null. */
  readonly lastError: string | null;
}

/** Connection options checked, with their defaults. */
export interface ResolvedMqttConnection {
  readonly url: string;
  readonly firstDelayMs: number;
  readonly maxDelayMs: number;
  readonly reportIntervalMs: number;
  readonly clientOptions: IClientOptions;
}

/** Checks the connection options (OptionError naming the option) and resolves their defaults. */
export function resolveMqttConnection(options: MqttConnectionOptions): ResolvedMqttConnection {
  const url = options.url ?? DEFAULT_MQTT_URL;
  if (!/^mqtts?:\/\/[^/]+/.test(url)) throw new OptionError('url', 'an mqtt:// or mqtts:// URL', url);
  if ((options.username === undefined) !== (options.password === undefined)) {
    throw new OptionError('password', 'given together with username', options.password === undefined ? undefined : '(hidden)');
  }
  const firstDelayMs = integerInRange('reconnectPeriodMs', options.reconnectPeriodMs ?? 1000, 100, 600_000);
  const maxDelayMs = integerInRange('maxReconnectPeriodMs', options.maxReconnectPeriodMs ?? Math.max(30_000, firstDelayMs), firstDelayMs, 3_600_000);
  const connectTimeout = integerInRange('connectTimeoutMs', options.connectTimeoutMs ?? 10_000, 100, 600_000);
  const reportIntervalMs = integerInRange('reportIntervalMs', options.reportIntervalMs ?? 60_000, 1, 86_400_000);
  return {
    url,
    firstDelayMs,
    maxDelayMs,
    reportIntervalMs,
    clientOptions: {
      clientId: options.clientId ?? `fringetally-${randomBytes(4).toString('hex')}`,
      // Retries are scheduled by the link, with a doubling wait; the client's own fixed-period retry stays off.
      reconnectPeriod: 0,
      connectTimeout,
      // Offline messages are dropped, never queued: the next one carries the latest values.
      queueQoSZero: false,
      clean: true,
      ...(options.username === undefined ? {} : { username: options.username, password: options.password }),
      ...(options.tls ?? {}),
    },
  };
}

export interface MqttLink {
  readonly client: MqttClient;
  readonly health: MqttLinkHealth;
  /** Records an error the owner met on the link (a failed publish), for `health.lastError`. */
  noteError(message: string): void;
  /** Stops retrying; `beforeEnd` runs first while still connected (e.g. an offline status); then disconnects. */
  close(beforeEnd?: () => Promise<void>): Promise<void>;
}

/**
 * Starts connecting in the background and keeps the connection: `onConnect` runs on every (re)connection (a clean
 * session forgets subscriptions: subscribe there), `onEvent` hears of each connection and outage.
 */
export function openMqttLink(
  connection: ResolvedMqttConnection,
  hooks: { readonly will?: IClientOptions['will']; readonly onConnect: () => void; readonly onEvent: (event: MqttLinkEvent) => void },
): MqttLink {
  const { firstDelayMs, maxDelayMs, reportIntervalMs } = connection;
  let closing = false;
  let connections = 0;
  let outages = 0;
  let outageMsDone = 0;
  let outageSince: number | null = null;
  let attemptsInOutage = 0;
  let failedAttempts = 0;
  let lastError: string | null = null;
  let lastReportMs = -Infinity;
  let delayMs = firstDelayMs;
  let retryTimer: NodeJS.Timeout | null = null;
  let wasConnected = false;

  const client: MqttClient = mqtt.connect(connection.url, { ...connection.clientOptions, ...(hooks.will === undefined ? {} : { will: hooks.will }) });
  client.on('error', (error) => {
    lastError = error.message;
  });
  client.on('connect', () => {
    const first = connections === 0;
    connections++;
    wasConnected = true;
    const outageMs = outageSince === null ? 0 : performance.now() - outageSince;
    if (outageSince !== null) outageMsDone += outageMs;
    const attempts = attemptsInOutage;
    outageSince = null;
    attemptsInOutage = 0;
    delayMs = firstDelayMs;
    hooks.onConnect();
    hooks.onEvent({ kind: 'connected', first, outageMs, attempts });
  });
  client.on('close', () => {
    if (closing) return;
    const now = performance.now();
    const retryInMs = delayMs;
    if (wasConnected || outageSince === null) {
      // A lost connection, or the first attempt failing: an outage begins.
      outages++;
      outageSince = now;
      if (!wasConnected) {
        failedAttempts++;
        attemptsInOutage++;
      }
      wasConnected = false;
      lastReportMs = now;
      hooks.onEvent({ kind: 'down', message: lastError ?? 'connection closed by the broker', retryInMs });
    } else {
      failedAttempts++;
      attemptsInOutage++;
      if (now - lastReportMs >= reportIntervalMs) {
        lastReportMs = now;
        hooks.onEvent({ kind: 'still-down', message: lastError ?? 'connection closed', attempts: attemptsInOutage, outageMs: now - outageSince, retryInMs });
      }
    }
    retryTimer = setTimeout(() => {
      retryTimer = null;
      if (!closing) client.reconnect();
    }, retryInMs);
    delayMs = Math.min(maxDelayMs, delayMs * 2);
  });

  return {
    client,
    get health() {
      return {
        connected: client.connected,
        connections,
        outages,
        outageMs: outageMsDone + (outageSince === null ? 0 : performance.now() - outageSince),
        failedAttempts,
        lastError,
      };
    },
    noteError(message) {
      lastError = message;
    },
    async close(beforeEnd) {
      closing = true;
      if (retryTimer !== null) clearTimeout(retryTimer);
      if (client.connected && beforeEnd !== undefined) await beforeEnd();
      await client.endAsync(!client.connected);
    },
  };
}

/** A process warning for `down` and `still-down`, and for `connected` after an outage; `what` names the link's use. */
export function warnMqttEvents(url: string, what = 'the measurement goes on'): (event: MqttLinkEvent) => void {
  return (event) => {
    if (event.kind === 'down') process.emitWarning(`MQTT broker at ${url} unreachable (${event.message}); retrying in ${Math.round(event.retryInMs)} ms, ${what}`);
    else if (event.kind === 'still-down') {
      process.emitWarning(`MQTT broker at ${url} still unreachable after ${(event.outageMs / 1000).toFixed(0)} s and ${event.attempts} attempts (${event.message})`);
    } else if (!event.first || event.attempts > 0) process.emitWarning(`MQTT broker at ${url} connected after an outage of ${(event.outageMs / 1000).toFixed(1)} s`);
  };
}
