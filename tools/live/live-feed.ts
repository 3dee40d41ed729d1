// The network side of `fringetally listen`: the WebSocket feed with its live page (--serve) and the MQTT publisher
// (--mqtt), both subscribed to the session's own axes (the chain the rows come from).
import { readFileSync } from 'node:fs';
// The server and the publisher are loaded by openLiveFeed when asked for: a listen without --serve or --mqtt does
// not load the ws and mqtt packages.
import { isLoopbackHost } from '../../src/io/feed/access.js';
import { DEFAULT_MQTT_TOPIC_PREFIX, DEFAULT_MQTT_UPDATE_HZ, DEFAULT_MQTT_URL } from '../../src/io/feed/mqtt-defaults.js';
import type {
  FeedServer,
  FeedSource,
  MqttPublisher,
  MqttPublisherEvent,
  MqttPublisherHealth,
  MqttPublisherOptions,
  ReferenceOutcome,
  ReferenceRequest,
} from '../../src/io/feed/index.js';
import type { Axes } from '../../src/stream/index.js';
import { numberOption, UsageError } from '../cli-kit.js';

export const feedOptionSpecs = {
  serve: { type: 'string' },
  token: { type: 'string' },
  'allow-origin': { type: 'string', multiple: true },
  proxy: { type: 'string', multiple: true },
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
/** Read when --serve is given without --token, so the token stays out of the process list. */
export const FEED_TOKEN_VARIABLE = 'FRINGETALLY_FEED_TOKEN';

export const feedOptionHelp = `Network feed (read-only, but for one command: a re-reference that carries the token):
  --serve [HOST:]PORT      WebSocket feed and live page (Lissajous figure, level, readouts, alarm log) on
                           HOST (default 127.0.0.1, loopback only); any other host needs --token
  --token T                shared token (at least 16 characters) clients must present, and that re-reference
                           commands must carry on the feed and on MQTT, even on loopback (without a token every
                           command is refused); without it, the token is read from $${FEED_TOKEN_VARIABLE}
                           when set. It is never printed.
  --allow-origin URL       also accept browser pages from this origin (e.g. https://hmi.lab.example); repeatable
  --proxy ADDRESS          a reverse proxy at ADDRESS passes the public host on and serves the page over
                           https (see docs/feed.md); needs a token; repeatable
  --mqtt URL               also publish to an MQTT broker, e.g. mqtt://127.0.0.1:1883
  --mqtt-topic PREFIX      topic prefix (default ${DEFAULT_MQTT_TOPIC_PREFIX})
  --mqtt-username U, --mqtt-password P   credentials for brokers that need them; without
                           --mqtt-password, the password is read from $${MQTT_PASSWORD_VARIABLE}
  --mqtt-update-hz R       publishing rate, Hz (default ${DEFAULT_MQTT_UPDATE_HZ})
  --mqtt-ca FILE           PEM CA certificate(s) that signed the broker's certificate (mqtts:// URLs;
                           default: the system's CAs)
  --mqtt-cert FILE, --mqtt-key FILE   PEM client certificate and key, for brokers that require them
The feed shows the rows' own chain: the same count, zero (the first sample, or the latest re-reference) and alarms.`;

export interface FeedSettings {
  readonly serve: {
    readonly host: string;
    readonly port: number;
    readonly token?: string;
    /** Where the token came from, for the log line that stands in for it. */
    readonly tokenSource: string | null;
    readonly allowedOrigins: readonly string[];
    readonly trustedProxies: readonly string[];
  } | null;
  readonly mqtt: Omit<MqttPublisherOptions, 'source'> | null;
  /** Where the token came from (--token or the environment), for the log lines; null without a token. */
  readonly tokenSource: string | null;
}

export function feedSettingsOf(values: Record<string, string | boolean | string[] | undefined>): FeedSettings | null {
  const serveText = values.serve as string | undefined;
  const mqttUrl = values.mqtt as string | undefined;
  const text = (name: string) => values[name] as string | undefined;
  const list = (name: string) => (values[name] as string[] | undefined) ?? [];
  const networked = serveText !== undefined || mqttUrl !== undefined;
  const tokenFromEnvironment = text('token') === undefined && networked ? process.env[FEED_TOKEN_VARIABLE] : undefined;
  const token = text('token') ?? tokenFromEnvironment;
  if (text('token') !== undefined && !networked) throw new UsageError('--token applies to --serve and --mqtt');
  const tokenSource = token === undefined ? null : tokenFromEnvironment === undefined ? '--token' : `$${FEED_TOKEN_VARIABLE}`;
  if (token !== undefined && token.length < 16) throw new UsageError(`the feed token (from ${tokenSource}) must be at least 16 characters (got ${token.length})`);
  for (const name of ['allow-origin', 'proxy']) {
    if (list(name).length > 0 && serveText === undefined) throw new UsageError(`--${name} applies to --serve`);
  }
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
    if (token === undefined && !isLoopbackHost(host)) {
      throw new UsageError(`--serve ${serveText} is reachable from the network: set --token or $${FEED_TOKEN_VARIABLE} (at least 16 characters)`);
    }
    if (token === undefined && list('proxy').length > 0) throw new UsageError(`--proxy makes the feed reachable from the network: set --token or $${FEED_TOKEN_VARIABLE}`);
    const allowedOrigins = list('allow-origin').map((origin) => {
      if (!/^https?:\/\/[^/\s]+$/.test(origin)) throw new UsageError(`--allow-origin expects an origin such as https://hmi.lab.example, scheme and host only (got "${origin}")`);
      return origin;
    });
    serve = { host, port, tokenSource, allowedOrigins, trustedProxies: list('proxy'), ...(token === undefined ? {} : { token }) };
  }
  if (mqttUrl === undefined) return { serve, mqtt: null, tokenSource };
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
    ...(token === undefined ? {} : { token }),
  };
  return { serve, mqtt, tokenSource };
}

export interface LiveFeed {
  /** Attaches the session's axes (and its edges) on the first samples: from then on updates flow (state `live`). Once. */
  start(axes: Axes, rateHz: number, extras?: Pick<FeedSource, 'edges$' | 'detectorOutputs' | 'geometry'>): void;
  /** Lines for the log: where the feed is (the token never appears, only where it came from). */
  describe(): string[];
  /** The MQTT publisher's link to its broker, for the summary; null without --mqtt. */
  readonly mqttHealth: MqttPublisherHealth | null;
  close(): Promise<void>;
}

/**
 * Opens the feed at launch: the WebSocket server listens (state `waiting`) and the MQTT publisher connects in
 * the background, before any sample arrives. A broker that is down never fails this: its outages go to `log`.
 * Both serve the session's own axes (the chain the rows come from) once `start` attaches them.
 */
export async function openLiveFeed(
  feedSettings: FeedSettings,
  /** The feed's hold on the chain failed: it sends nothing more, while the caller's own rows go on. */
  onError: (error: Error) => void,
  log: (line: string) => void,
  /** Re-reference commands that carry the token (refused without one); see docs/feed.md. */
  onReference: (request: ReferenceRequest) => ReferenceOutcome,
): Promise<LiveFeed> {
  let server: FeedServer | null = null;
  if (feedSettings.serve !== null) {
    const { startFeedServer } = await import('../../src/io/feed/feed-server.js');
    server = await startFeedServer({ ...feedSettings.serve, onReference, onSourceError: (error) => onError(error instanceof Error ? error : new Error(String(error))) });
  }
  let publisher: MqttPublisher | null = null;
  if (feedSettings.mqtt !== null) {
    const url = feedSettings.mqtt.url ?? DEFAULT_MQTT_URL;
    const { createMqttPublisher } = await import('../../src/io/feed/mqtt-publisher.js');
    publisher = createMqttPublisher({ ...feedSettings.mqtt, onReference, onEvent: (event) => log(mqttEventLine(url, event)) });
  }
  return {
    start(axes, rateHz, extras = {}) {
      const source: FeedSource = { ...extras, axes, rateHz };
      server?.attach(source);
      publisher?.attach(source);
    },
    describe() {
      const serve = feedSettings.serve;
      return [
        ...(server === null || serve === null
          ? []
          : [
              `live page at ${server.pageUrlForDisplay} (feed ${server.feedUrlForDisplay}` +
                `${serve.tokenSource === null ? '' : `; <token> is the one from ${serve.tokenSource}`}); ${commandText(feedSettings.tokenSource)}, waiting for samples`,
            ]),
        ...(publisher === null
          ? []
          : [
              `publishing to MQTT topics ${feedSettings.mqtt!.topicPrefix ?? DEFAULT_MQTT_TOPIC_PREFIX}/axis/X, ${feedSettings.mqtt!.topicPrefix ?? DEFAULT_MQTT_TOPIC_PREFIX}/edge, ` +
                `${publisher.statusTopic} at ${feedSettings.mqtt!.url ?? DEFAULT_MQTT_URL}; ` +
                `${commandText(feedSettings.tokenSource)} on ${publisher.commandTopic} (replies on ${publisher.replyTopic})`,
            ]),
      ];
    },
    get mqttHealth() {
      return publisher?.health ?? null;
    },
    async close() {
      await server?.close();
      await publisher?.close();
    },
  };
}

function commandText(tokenSource: string | null): string {
  return tokenSource === null ? 'read-only (re-reference commands need a token)' : `read-only but for re-reference commands carrying the token from ${tokenSource}`;
}

/** One log line per MQTT event; the publisher already limits how often they come. */
/** A log line for an MQTT link's event; `goesOn` says what continues during an outage. */
export function mqttEventLine(url: string, event: MqttPublisherEvent, goesOn = 'the measurement goes on'): string {
  switch (event.kind) {
    case 'down':
      return `MQTT broker at ${url} unreachable (${event.message}); retrying with backoff, ${goesOn}`;
    case 'still-down':
      return `MQTT broker at ${url} still unreachable after ${(event.outageMs / 1000).toFixed(0)} s and ${event.attempts} attempts (${event.message})`;
    case 'connected':
      return event.first && event.attempts === 0 ? `MQTT broker at ${url} connected` : `MQTT broker at ${url} connected after ${(event.outageMs / 1000).toFixed(1)} s offline`;
  }
}
