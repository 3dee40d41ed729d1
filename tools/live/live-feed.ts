// The network side of `fringetally listen`: the WebSocket feed with its live page (--serve) and the MQTT publisher
// (--mqtt), both fed with the raw samples of every processed block through the stream API's shared axis builder.
import { readFileSync } from 'node:fs';
import { Subject } from 'rxjs';
import type { EllipseCalibration } from '../../src/core/index.js';
import { startFeedServer, startMqttPublisher, type FeedServer, type MqttPublisher, type MqttPublisherOptions } from '../../src/io/feed/index.js';
import { createAxes, type AxisBlock } from '../../src/stream/index.js';
import type { MeasureSettings } from '../capture-run.js';
import { numberOption, UsageError } from '../cli-kit.js';
import type { LiveBlock } from './live-session.js';

export const feedOptionSpecs = {
  serve: { type: 'string' },
  token: { type: 'string' },
  mqtt: { type: 'string' },
  'mqtt-topic': { type: 'string' },
  'mqtt-username': { type: 'string' },
  'mqtt-password': { type: 'string' },
  'mqtt-update-hz': { type: 'string' },
  'mqtt-ca': { type: 'string' },
  'mqtt-cert': { type: 'string' },
  'mqtt-key': { type: 'string' },
} as const;

/** Read when --mqtt-username is given without --mqtt-password, so the password stays out of the process list. */
export const MQTT_PASSWORD_VARIABLE = 'FRINGETALLY_MQTT_PASSWORD';

export const feedOptionHelp = `Network feed (read-only: nothing a client sends changes the measurement):
  --serve [HOST:]PORT      WebSocket feed and live page (Lissajous figure, level, readouts, alarm log) on
                           HOST (default 127.0.0.1, loopback only); any other host needs --token
  --token T                shared token clients must present (at least 16 characters)
  --mqtt URL               also publish to an MQTT broker, e.g. mqtt://127.0.0.1:1883
  --mqtt-topic PREFIX      topic prefix (default fringetally)
  --mqtt-username U, --mqtt-password P   credentials for brokers that need them; without
                           --mqtt-password, the password is read from $${MQTT_PASSWORD_VARIABLE}
  --mqtt-update-hz R       publishing rate, Hz (default 10)
  --mqtt-ca FILE           PEM CA certificate(s) that signed the broker's certificate (mqtts:// URLs;
                           default: the system's CAs)
  --mqtt-cert FILE, --mqtt-key FILE   PEM client certificate and key, for brokers that require them
The feed's zero is the first sample it sees: the first sample with a file calibration, the first after a live fit.`;

export interface FeedSettings {
  readonly serve: { readonly host: string; readonly port: number; readonly token?: string } | null;
  readonly mqtt: Omit<MqttPublisherOptions, 'axes'> | null;
}

export function feedSettingsOf(values: Record<string, string | boolean | undefined>): FeedSettings | null {
  const serveText = values.serve as string | undefined;
  const token = values.token as string | undefined;
  const mqttUrl = values.mqtt as string | undefined;
  const text = (name: string) => values[name] as string | undefined;
  if (token !== undefined && serveText === undefined) throw new UsageError('--token applies to --serve');
  if (mqttUrl === undefined) {
    const stray = Object.keys(feedOptionSpecs).find((name) => name.startsWith('mqtt-') && text(name) !== undefined);
    if (stray !== undefined) throw new UsageError(`--${stray} applies to --mqtt`);
    if (serveText === undefined) return null;
  }
  let serve: FeedSettings['serve'] = null;
  if (serveText !== undefined) {
    // PORT, HOST:PORT or [IPv6]:PORT
    const match = /^(?:(\[[^\]]+\]|[^:]+):)?(\d{1,5})$/.exec(serveText);
    const port = match === null ? NaN : Number(match[2]);
    if (match === null || !(port >= 0 && port <= 65535)) throw new UsageError(`--serve expects [HOST:]PORT (got "${serveText}")`);
    const host = match[1] === undefined ? '127.0.0.1' : match[1].replace(/^\[|\]$/g, '');
    serve = { host, port, ...(token === undefined ? {} : { token }) };
  }
  if (mqttUrl === undefined) return { serve, mqtt: null };
  const updateHz = numberOption('mqtt-update-hz', text('mqtt-update-hz'));
  const username = text('mqtt-username');
  let password = text('mqtt-password');
  if (username !== undefined && password === undefined) {
    password = process.env[MQTT_PASSWORD_VARIABLE];
    if (password === undefined) throw new UsageError(`--mqtt-username needs --mqtt-password or the environment variable ${MQTT_PASSWORD_VARIABLE}`);
  }
  if (username === undefined && password !== undefined) throw new UsageError('--mqtt-password needs --mqtt-username');
  if ((text('mqtt-cert') === undefined) !== (text('mqtt-key') === undefined)) throw new UsageError('--mqtt-cert and --mqtt-key go together');
  const pem = (name: string): string | undefined => {
    const path = text(name);
    if (path === undefined) return undefined;
    try {
      return readFileSync(path, 'utf8');
    } catch (error) {
      throw new UsageError(`--${name} ${path}: cannot read the PEM file (${(error as NodeJS.ErrnoException).code ?? (error as Error).message})`);
    }
  };
  const tls = { ca: pem('mqtt-ca'), cert: pem('mqtt-cert'), key: pem('mqtt-key') };
  const given = Object.fromEntries(Object.entries(tls).filter(([, value]) => value !== undefined));
  if (Object.keys(given).length > 0 && !mqttUrl.startsWith('mqtts://')) {
    throw new UsageError(`--mqtt-ca, --mqtt-cert and --mqtt-key need an mqtts:// URL (got ${mqttUrl})`);
  }
  const mqtt: FeedSettings['mqtt'] = {
    url: mqttUrl,
    ...(text('mqtt-topic') === undefined ? {} : { topicPrefix: text('mqtt-topic')! }),
    ...(username === undefined ? {} : { username, password: password! }),
    ...(updateHz === undefined ? {} : { updateHz }),
    ...(Object.keys(given).length === 0 ? {} : { tls: given }),
  };
  return { serve, mqtt };
}

export interface LiveFeed {
  /** Hands the block's raw samples (and any gap before them) to the feed's axis. */
  push(block: Pick<LiveBlock, 'x' | 'y' | 'length' | 'gapBefore'>): void;
  /** Lines for the log: where the feed is. */
  describe(): string[];
  close(): Promise<void>;
}

export async function createLiveFeed(
  feedSettings: FeedSettings,
  stream: { readonly rateHz: number; readonly settings: MeasureSettings; readonly calibration: EllipseCalibration | null },
  /** The feed's chain failed: it sends nothing more, while the caller's own rows go on. */
  onError: (error: Error) => void,
): Promise<LiveFeed> {
  const { settings } = stream;
  const blocks = new Subject<AxisBlock>();
  const axes = createAxes(blocks, {
    axes: [
      {
        name: 'X',
        rateHz: stream.rateHz,
        wavelengthM: settings.wavelengthM,
        fold: settings.fold,
        refractiveIndex: settings.refractiveIndex,
        lengthScale: settings.lengthScale,
        bandwidthHz: settings.bandwidthHz,
        unwrap: settings.unwrap,
        calibration: stream.calibration,
      },
    ],
  });
  // Holds the chain open so that the feed's reference survives clients coming and going.
  const keepAlive = axes.connect({ error: (error: unknown) => onError(error instanceof Error ? error : new Error(String(error))) });
  let server: FeedServer | null = null;
  let publisher: MqttPublisher | null = null;
  try {
    if (feedSettings.serve !== null) server = await startFeedServer({ axes, ...feedSettings.serve });
    if (feedSettings.mqtt !== null) publisher = await startMqttPublisher({ axes, ...feedSettings.mqtt });
  } catch (error) {
    keepAlive.unsubscribe();
    await server?.close();
    throw error;
  }
  return {
    push(block) {
      blocks.next({ x: block.x, y: block.y, length: block.length, gapBefore: block.gapBefore });
    },
    describe() {
      return [
        ...(server === null ? [] : [`live page at ${server.pageUrl} (feed ${server.feedUrl}); read-only`]),
        ...(publisher === null ? [] : [`publishing to MQTT topics ${publisher.axisTopics.join(', ')}`]),
      ];
    },
    async close() {
      blocks.complete();
      keepAlive.unsubscribe();
      await server?.close();
      await publisher?.close();
    },
  };
}
