// The network side of `fringetally listen`: the WebSocket feed with its live page (--serve) and the MQTT publisher
// (--mqtt), both fed with the raw samples of every processed block through the stream API's shared axis builder.
import { Subject } from 'rxjs';
import type { EllipseCalibration } from '../../src/core/index.js';
import { startFeedServer, startMqttPublisher, type FeedServer, type MqttPublisher } from '../../src/io/feed/index.js';
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
} as const;

export const feedOptionHelp = `Network feed (read-only: nothing a client sends changes the measurement):
  --serve [HOST:]PORT      WebSocket feed and live page (Lissajous figure, level, readouts, alarm log) on
                           HOST (default 127.0.0.1, loopback only); any other host needs --token
  --token T                shared token clients must present (at least 16 characters)
  --mqtt URL               also publish to an MQTT broker, e.g. mqtt://127.0.0.1:1883
  --mqtt-topic PREFIX      topic prefix (default fringetally)
  --mqtt-username U, --mqtt-password P   credentials for brokers that need them
  --mqtt-update-hz R       publishing rate, Hz (default 10)
The feed's zero is the first sample it sees: the first sample with a file calibration, the first after a live fit.`;

export interface FeedSettings {
  readonly serve: { readonly host: string; readonly port: number; readonly token?: string } | null;
  readonly mqtt: { readonly url: string; readonly topicPrefix?: string; readonly username?: string; readonly password?: string; readonly updateHz?: number } | null;
}

export function feedSettingsOf(values: Record<string, string | boolean | undefined>): FeedSettings | null {
  const serveText = values.serve as string | undefined;
  const token = values.token as string | undefined;
  const mqttUrl = values.mqtt as string | undefined;
  if (serveText === undefined && mqttUrl === undefined) {
    if (token !== undefined) throw new UsageError('--token applies to --serve');
    return null;
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
  const updateHz = numberOption('mqtt-update-hz', values['mqtt-update-hz'] as string | undefined);
  const text = (name: string) => values[name] as string | undefined;
  const mqtt: FeedSettings['mqtt'] =
    mqttUrl === undefined
      ? null
      : {
          url: mqttUrl,
          ...(text('mqtt-topic') === undefined ? {} : { topicPrefix: text('mqtt-topic')! }),
          ...(text('mqtt-username') === undefined ? {} : { username: text('mqtt-username')! }),
          ...(text('mqtt-password') === undefined ? {} : { password: text('mqtt-password')! }),
          ...(updateHz === undefined ? {} : { updateHz }),
        };
  return { serve, mqtt };
}

export interface LiveFeed {
  /** Hands the block's raw samples (and any gap before them) to the feed's axis. */
  push(block: LiveBlock): void;
  /** Lines for the log: where the feed is. */
  describe(): string[];
  close(): Promise<void>;
}

export async function createLiveFeed(
  feedSettings: FeedSettings,
  stream: { readonly rateHz: number; readonly settings: MeasureSettings; readonly calibration: EllipseCalibration | null },
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
  const keepAlive = axes.connect({ error: () => undefined });
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
