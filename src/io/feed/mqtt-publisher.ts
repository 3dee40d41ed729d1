// MQTT publisher for sites that already run a broker: one retained JSON message per axis per update, an
// online/offline status with a last will. It never subscribes, so nothing from the broker reaches the measurement.

import { randomBytes } from 'node:crypto';
import mqtt, { type IClientOptions, type MqttClient } from 'mqtt';
import type { Subscription } from 'rxjs';
import { integerInRange, OptionError, positiveFinite } from '../../core/index.js';
import type { Axes } from '../../stream/index.js';
import { FEED_SCHEMA, feedAxisState, type FeedAxisState } from './messages.js';

export interface MqttTlsOptions {
  /** CA certificate(s), PEM, for a broker with a private CA. Default: the system's CAs. */
  readonly ca?: string | Buffer;
  /** Client certificate and key, PEM, for brokers that require them. */
  readonly cert?: string | Buffer;
  readonly key?: string | Buffer;
  /** Check the broker's certificate. Default true; false only for tests against self-signed brokers. */
  readonly rejectUnauthorized?: boolean;
}

export interface MqttPublisherOptions {
  readonly axes: Axes;
  /** Broker URL: `mqtt://host:port` or `mqtts://host:port` (TLS). Default `mqtt://127.0.0.1:1883`. */
  readonly url?: string;
  /** Topic prefix without wildcards or leading/trailing `/`. Default `fringetally`. */
  readonly topicPrefix?: string;
  /** Updates per second per axis, (0, 100]. Default 10. */
  readonly updateHz?: number;
  /** MQTT QoS of the updates: 0 or 1. Default 0 (the next update replaces a lost one). */
  readonly qos?: 0 | 1;
  /** Retain the latest update, so a subscriber that (re)connects gets it at once. Default true. */
  readonly retain?: boolean;
  readonly username?: string;
  readonly password?: string;
  readonly tls?: MqttTlsOptions;
  /** Default `fringetally-` and 8 random hex digits. */
  readonly clientId?: string;
  /** Wait before reconnecting after the broker goes away, ms. Default 1000. */
  readonly reconnectPeriodMs?: number;
  /** Give up the first connection after this long, ms. Default 10000. */
  readonly connectTimeoutMs?: number;
  /** Errors after the first connection (the client reconnects by itself); default: a process warning. */
  readonly onError?: (error: Error) => void;
}

export interface MqttPublisher {
  /** `<prefix>/axis/<name>`, one per axis. */
  readonly axisTopics: readonly string[];
  /** `<prefix>/status`: retained `{"state":"online"|"offline", ...}`. */
  readonly statusTopic: string;
  /** Update messages handed to the client so far. */
  readonly published: number;
  /** Publishes the offline status, disconnects and stops the updates. */
  close(): Promise<void>;
}

/** Payload on `<prefix>/axis/<name>`. */
export interface MqttAxisMessage extends FeedAxisState {
  readonly type: 'axis';
  readonly schema: typeof FEED_SCHEMA;
  readonly seq: number;
}

const TOPIC_PREFIX = /^[^#+/\u0000]+(\/[^#+/\u0000]+)*$/;

export async function startMqttPublisher(options: MqttPublisherOptions): Promise<MqttPublisher> {
  const { axes } = options;
  const url = options.url ?? 'mqtt://127.0.0.1:1883';
  if (!/^mqtts?:\/\/[^/]+/.test(url)) throw new OptionError('url', 'an mqtt:// or mqtts:// URL', url);
  const prefix = options.topicPrefix ?? 'fringetally';
  if (!TOPIC_PREFIX.test(prefix)) throw new OptionError('topicPrefix', 'MQTT topic levels without +, # or empty levels', prefix);
  const updateHz = positiveFinite('updateHz', options.updateHz ?? 10);
  if (updateHz > 100) throw new OptionError('updateHz', 'a positive finite number up to 100', updateHz);
  const qos = options.qos ?? 0;
  if (qos !== 0 && qos !== 1) throw new OptionError('qos', '0 or 1', qos);
  const retain = options.retain ?? true;
  if ((options.username === undefined) !== (options.password === undefined)) {
    throw new OptionError('password', 'given together with username', options.password === undefined ? undefined : '(hidden)');
  }
  const reconnectPeriod = integerInRange('reconnectPeriodMs', options.reconnectPeriodMs ?? 1000, 100, 600_000);
  const connectTimeout = integerInRange('connectTimeoutMs', options.connectTimeoutMs ?? 10_000, 100, 600_000);
  const onError = options.onError ?? ((error: Error) => process.emitWarning(`MQTT publisher: ${error.message}`));
  const statusTopic = `${prefix}/status`;
  const axisTopics = axes.names.map((name) => `${prefix}/axis/${name}`);
  const status = (state: 'online' | 'offline') => JSON.stringify({ type: 'status', schema: FEED_SCHEMA, state, axes: axes.names });

  const clientOptions: IClientOptions = {
    clientId: options.clientId ?? `fringetally-${randomBytes(4).toString('hex')}`,
    reconnectPeriod,
    connectTimeout,
    // Offline updates are dropped, never queued: the next one carries the latest values.
    queueQoSZero: false,
    clean: true,
    will: { topic: statusTopic, payload: Buffer.from(status('offline')), qos: 1, retain: true },
    ...(options.username === undefined ? {} : { username: options.username, password: options.password }),
    ...(options.tls ?? {}),
  };

  const client: MqttClient = mqtt.connect(url, clientOptions);
  await new Promise<void>((resolve, reject) => {
    const fail = (error: Error) => {
      client.end(true);
      reject(new Error(`MQTT broker at ${url} refused or failed the connection: ${error.message}`));
    };
    client.once('connect', () => {
      client.off('error', fail);
      resolve();
    });
    client.once('error', fail);
  });
  client.on('error', onError);

  let published = 0;
  let inFlight = 0;
  let seq = 0;
  client.publish(statusTopic, status('online'), { qos: 1, retain: true });
  client.on('connect', () => client.publish(statusTopic, status('online'), { qos: 1, retain: true }));

  const subscription: Subscription = axes
    .update$({ updateHz, ready: () => client.connected && inFlight === 0 })
    .subscribe({
      next(update) {
        seq++;
        update.axes.forEach((axis, k) => {
          const message: MqttAxisMessage = { type: 'axis', schema: FEED_SCHEMA, seq, ...feedAxisState(axis) };
          inFlight++;
          published++;
          client.publish(axisTopics[k]!, JSON.stringify(message), { qos, retain }, (error) => {
            inFlight--;
            if (error) onError(error);
          });
        });
      },
      error: (error: unknown) => onError(new Error(`measurement source failed: ${String(error)}`)),
    });

  return {
    axisTopics,
    statusTopic,
    get published() {
      return published;
    },
    async close() {
      subscription.unsubscribe();
      if (client.connected) {
        await new Promise<void>((resolve) => client.publish(statusTopic, status('offline'), { qos: 1, retain: true }, () => resolve()));
      }
      await client.endAsync();
    },
  };
}
