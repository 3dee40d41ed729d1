// MQTT publisher for sites that already run a broker: one retained JSON message per axis per update, an
// online/offline status with a last will. It subscribes to nothing unless it takes re-reference commands
// (`onReference`); then only a command carrying the token reaches the measurement.
// A broker that is down or goes away never stops the measurement: the publisher connects in the background,
// retries with a doubling wait, reports each outage once (then at most once per interval) and keeps its figures.

import type { Subscription } from 'rxjs';
import { OptionError, positiveFinite } from '../../core/index.js';
import type { FeedSource } from './feed-server.js';
import { DEFAULT_MQTT_TOPIC_PREFIX, DEFAULT_MQTT_UPDATE_HZ, DEFAULT_MQTT_URL } from './mqtt-defaults.js';
import { openMqttLink, resolveMqttConnection, warnMqttEvents, type MqttConnectionOptions, type MqttLinkEvent, type MqttLinkHealth } from './mqtt-link.js';
import { createUpdateGeometry, type UpdateGeometry } from '../../stream/index.js';
import {
  FEED_SCHEMA,
  feedAxisState,
  feedEdgeMessage,
  feedGeometry,
  feedTimeBase,
  referenceCommandOf,
  runReferenceCommand,
  type FeedAxisState,
  type FeedErrorMessage,
  type FeedGeometry,
  type FeedState,
  type FeedTimeBase,
  type ReferenceOutcome,
  type ReferenceRequest,
} from './messages.js';

/** What the publisher tells its owner: the broker came (back), went away, or is still away. */
export type MqttPublisherEvent = MqttLinkEvent;

export interface MqttPublisherOptions extends MqttConnectionOptions {
  /** What to publish. Absent: the publisher connects at once, publishes status `waiting` and publishes updates from `attach(source)`. */
  readonly source?: FeedSource;
  /** Topic prefix without wildcards or leading/trailing `/`. Default `fringetally`. */
  readonly topicPrefix?: string;
  /** Updates per second per axis, (0, 100]. Default 10. */
  readonly updateHz?: number;
  /** MQTT QoS of the updates: 0 or 1. Default 0 (the next update replaces a lost one). */
  readonly qos?: 0 | 1;
  /** Retain the latest update, so a subscriber that (re)connects gets it at once. Default true. */
  readonly retain?: boolean;
  /** Default: a process warning for `down` and `still-down`, and for `connected` after an outage. */
  readonly onEvent?: (event: MqttPublisherEvent) => void;
  /**
   * Takes re-reference commands on `<prefix>/command` (JSON as on the WebSocket feed, docs/feed.md) and answers on
   * `<prefix>/command/reply`: called for each command whose token matches `token`. Absent: nothing is subscribed.
   */
  readonly onReference?: (request: ReferenceRequest) => ReferenceOutcome;
  /** The shared secret commands must carry (at least 16 characters). Without it every command is refused. */
  readonly token?: string;
}

/** The publisher's link to its broker, for a summary. */
export interface MqttPublisherHealth extends MqttLinkHealth {
  /** Update messages handed to the client. */
  readonly published: number;
  /** Edge messages handed to the client, and those not sent because the broker was unreachable. */
  readonly edgesPublished: number;
  readonly edgesNotSent: number;
}

export interface MqttPublisher {
  /** `<prefix>/axis/<name>`, one per axis; empty until a source is attached. */
  readonly axisTopics: readonly string[];
  /** `<prefix>/geometry` when the source has a geometry (yaw, pitch, point of interest per update), else null. */
  readonly geometryTopic: string | null;
  /** `<prefix>/edge`: one `edge` message per axis and edge (QoS 1, not retained) when the source has `edges$`, else null. */
  readonly edgeTopic: string | null;
  /** `<prefix>/status`: retained `{"state":"online"|"offline","measurement":...}`. */
  readonly statusTopic: string;
  /** `<prefix>/command` and `<prefix>/command/reply` when the publisher takes commands, else null. */
  readonly commandTopic: string | null;
  readonly replyTopic: string | null;
  /** Update messages handed to the client so far. */
  readonly published: number;
  readonly health: MqttPublisherHealth;
  /** Starts publishing `source` (once; the publisher was created without one). */
  attach(source: FeedSource): void;
  /** Publishes the offline status if connected, stops retrying and the updates, and disconnects. */
  close(): Promise<void>;
}

/** Payload on `<prefix>/axis/<name>`. */
export interface MqttAxisMessage extends FeedAxisState, FeedTimeBase {
  readonly type: 'axis';
  readonly schema: typeof FEED_SCHEMA;
  readonly seq: number;
}

/** Payload on `<prefix>/geometry`. */
export interface MqttGeometryMessage extends FeedGeometry, FeedTimeBase {
  readonly type: 'geometry';
  readonly schema: typeof FEED_SCHEMA;
  readonly seq: number;
}

/** Payload on `<prefix>/status`. */
export interface MqttStatusMessage extends FeedTimeBase {
  readonly type: 'status';
  readonly schema: typeof FEED_SCHEMA;
  /** The publisher's link: `offline` is also its last will. */
  readonly state: 'online' | 'offline';
  readonly measurement: FeedState;
  readonly axes: readonly string[];
  /** As in the feed's status: detector outputs of each axis, or null. */
  readonly detectorOutputs: readonly number[] | null;
}

/** Largest command payload read, bytes (as the WebSocket feed's default message limit). */
const MAX_COMMAND_BYTES = 1024;

const TOPIC_PREFIX = /^[^#+/\u0000]+(\/[^#+/\u0000]+)*$/;

/**
 * Creates the publisher and starts connecting in the background. It never fails for the broker's sake: a
 * refused, failed or lost connection is reported through `onEvent` and retried, while the source runs on.
 * Throws only for invalid options.
 */
export function createMqttPublisher(options: MqttPublisherOptions): MqttPublisher {
  const connection = resolveMqttConnection(options);
  const prefix = options.topicPrefix ?? DEFAULT_MQTT_TOPIC_PREFIX;
  if (!TOPIC_PREFIX.test(prefix)) throw new OptionError('topicPrefix', 'MQTT topic levels without +, # or empty levels', prefix);
  const updateHz = positiveFinite('updateHz', options.updateHz ?? DEFAULT_MQTT_UPDATE_HZ);
  if (updateHz > 100) throw new OptionError('updateHz', 'a positive finite number up to 100', updateHz);
  // A geometry naming a missing axis is refused here, before the client starts connecting in the background.
  if (options.source?.geometry !== undefined) createUpdateGeometry(options.source.geometry, options.source.axes.names);
  const qos = options.qos ?? 0;
  if (qos !== 0 && qos !== 1) throw new OptionError('qos', '0 or 1', qos);
  const retain = options.retain ?? true;
  const onEvent = options.onEvent ?? warnMqttEvents(connection.url);
  const statusTopic = `${prefix}/status`;
  const onReference = options.onReference;
  if (onReference !== undefined && typeof onReference !== 'function') throw new OptionError('onReference', 'a function', typeof onReference);
  const token = options.token;
  if (token !== undefined && (typeof token !== 'string' || token.length < 16)) throw new OptionError('token', 'a string of at least 16 characters', '(hidden)');
  const commandTopic = onReference === undefined ? null : `${prefix}/command`;
  const replyTopic = onReference === undefined ? null : `${prefix}/command/reply`;

  let source: FeedSource | null = null;
  let measurement: FeedState = 'waiting';
  let axisTopics: string[] = [];
  let geometry: UpdateGeometry | null = null;
  let geometryTopic: string | null = null;
  let edgeTopic: string | null = null;
  let edgesPublished = 0;
  let edgesNotSent = 0;
  // The latest sample published, for the time base of status messages.
  let latestSampleIndex = -1;
  const status = (state: 'online' | 'offline'): string => {
    const message: MqttStatusMessage = {
      type: 'status',
      schema: FEED_SCHEMA,
      state,
      measurement,
      axes: source?.axes.names ?? [],
      detectorOutputs: source?.detectorOutputs ?? null,
      ...feedTimeBase(source?.rateHz ?? null, latestSampleIndex),
    };
    return JSON.stringify(message);
  };

  let published = 0;
  let seq = 0;
  // Acknowledgements of a lost connection never come: in-flight counts belong to one connection.
  let inFlight = 0;
  let generation = 0;

  const link = openMqttLink(connection, {
    will: { topic: statusTopic, payload: Buffer.from(status('offline')), qos: 1, retain: true },
    onConnect() {
      generation++;
      inFlight = 0;
      client.publish(statusTopic, status('online'), { qos: 1, retain: true });
      // A clean session forgets subscriptions: subscribe again on every connection.
      if (commandTopic !== null) client.subscribe(commandTopic, { qos: 1 });
    },
    onEvent,
  });
  const client = link.client;
  client.on('message', (topic, payload) => {
    if (topic !== commandTopic || onReference === undefined) return;
    const record = payload.length > MAX_COMMAND_BYTES ? null : referenceCommandOf(payload.toString());
    const answer: object = record === null
      ? ({ type: 'error', code: 'bad-message', message: `a command is a JSON object {"type":"reference","token":…} of at most ${MAX_COMMAND_BYTES} bytes; nothing changed` } satisfies FeedErrorMessage)
      : runReferenceCommand(record, token, 'MQTT', onReference);
    client.publish(replyTopic!, JSON.stringify(answer), { qos: 1, retain: false });
  });
  let subscription: Subscription | null = null;
  let edgeSubscription: Subscription | null = null;
  function attach(next: FeedSource): void {
    if (source !== null) throw new Error('the MQTT publisher already has a source: attach it once');
    positiveFinite('source.rateHz', next.rateHz);
    geometry = next.geometry === undefined ? null : createUpdateGeometry(next.geometry, next.axes.names);
    geometryTopic = geometry === null ? null : `${prefix}/geometry`;
    source = next;
    axisTopics = next.axes.names.map((name) => `${prefix}/axis/${name}`);
    const setMeasurement = (state: FeedState) => {
      measurement = state;
      // The last will goes out with each (re)connection: keep it telling the measurement's state.
      if (client.options.will) client.options.will.payload = Buffer.from(status('offline'));
      if (client.connected) client.publish(statusTopic, status('online'), { qos: 1, retain: true });
    };
    setMeasurement('live');
    if (next.edges$ !== undefined) {
      edgeTopic = `${prefix}/edge`;
      // Events, not states: each is sent once with QoS 1 and not retained; none is queued while the broker is away.
      edgeSubscription = next.edges$.subscribe({
        next(edge) {
          if (!client.connected) {
            edgesNotSent++;
            return;
          }
          edgesPublished++;
          client.publish(edgeTopic!, JSON.stringify(feedEdgeMessage(edge)), { qos: 1, retain: false }, (error) => {
            if (error) link.noteError(error.message);
          });
        },
        error: () => undefined,
      });
    }
    const { rateHz } = next;
    subscription = next.axes.update$({ updateHz, ready: () => client.connected && inFlight === 0 }).subscribe({
      next(update) {
        // The source's last update comes at its end whether or not the broker is there: offline, it is dropped.
        if (!client.connected) return;
        seq++;
        const sampleIndex = update.axes[0]!.sampleIndex;
        latestSampleIndex = sampleIndex;
        const timeBase = feedTimeBase(rateHz, sampleIndex);
        const sentIn = generation;
        update.axes.forEach((axis, k) => {
          const message: MqttAxisMessage = { type: 'axis', schema: FEED_SCHEMA, seq, ...timeBase, ...feedAxisState(axis) };
          inFlight++;
          published++;
          client.publish(axisTopics[k]!, JSON.stringify(message), { qos, retain }, (error) => {
            if (sentIn === generation) inFlight--;
            if (error) link.noteError(error.message);
          });
        });
        if (geometry !== null) {
          const message: MqttGeometryMessage = { type: 'geometry', schema: FEED_SCHEMA, seq, ...timeBase, ...feedGeometry(geometry.solve(update)) };
          inFlight++;
          published++;
          client.publish(geometryTopic!, JSON.stringify(message), { qos, retain }, (error) => {
            if (sentIn === generation) inFlight--;
            if (error) link.noteError(error.message);
          });
        }
      },
      error: (error: unknown) => {
        link.noteError(`measurement source failed: ${String(error)}`);
        setMeasurement('failed');
      },
      complete: () => setMeasurement('ended'),
    });
  }
  if (options.source !== undefined) attach(options.source);

  return {
    get axisTopics() {
      return axisTopics;
    },
    get geometryTopic() {
      return geometryTopic;
    },
    get edgeTopic() {
      return edgeTopic;
    },
    statusTopic,
    commandTopic,
    replyTopic,
    get published() {
      return published;
    },
    get health() {
      return {
        ...link.health,
        published,
        edgesPublished,
        edgesNotSent,
      };
    },
    attach,
    async close() {
      subscription?.unsubscribe();
      edgeSubscription?.unsubscribe();
      await link.close(() => new Promise<void>((resolve) => client.publish(statusTopic, status('offline'), { qos: 1, retain: true }, () => resolve())));
    },
  };
}

/**
 * Creates the publisher and waits for its first connection; a refused or failed first connection closes it and
 * rejects with `MQTT broker at <url> refused or failed the connection: ...`. For programs that would rather not
 * start without their broker; `createMqttPublisher` never fails for the broker's sake.
 */
export async function startMqttPublisher(options: MqttPublisherOptions): Promise<MqttPublisher> {
  let settle: ((event: MqttPublisherEvent) => void) | null = null;
  const first = new Promise<MqttPublisherEvent>((resolve) => (settle = resolve));
  const onEvent = options.onEvent ?? warnMqttEvents(options.url ?? DEFAULT_MQTT_URL);
  const publisher = createMqttPublisher({
    ...options,
    onEvent(event) {
      if (settle !== null) {
        settle(event);
        settle = null;
        if (event.kind === 'connected') onEvent(event);
      } else onEvent(event);
    },
  });
  const outcome = await first;
  if (outcome.kind !== 'connected') {
    await publisher.close();
    throw new Error(`MQTT broker at ${options.url ?? DEFAULT_MQTT_URL} refused or failed the connection: ${outcome.message}`);
  }
  return publisher;
}
