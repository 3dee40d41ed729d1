// The feed's JSON message schema (version 1), shared by the WebSocket feed, the MQTT publisher and the page.

import { alarmNames, alarmText, MODEL_WATCH_ALARM, type AlarmEvent, type EdgePosition, type ModelWatchEvent } from '../../core/index.js';
import type { AxesUpdate, AxisUpdate, GeometryUpdate, Trace } from '../../stream/index.js';
import { tokenMatches } from './access.js';

export const FEED_SCHEMA = 1;

/**
 * The unit of an alarm event's `value`: `level` (normalised signal level, 1 on the calibrated ellipse),
 * `input units` (a raw sample as the source gave it, ADC counts for int16 frames), `rad/sample` (phase step
 * between two samples), `rad` (phase travel while the signal was held), `samples` (lost in transport),
 * `relative power` (source power, 1 at the calibration's mean), `relative radius` (`calibration_stale`: the mean
 * radius's change, or the radius scatter's RMS, relative to the calibrated radius).
 */
export type FeedValueUnit = 'level' | 'input units' | 'rad/sample' | 'rad' | 'samples' | 'relative power' | 'relative radius';

/** An alarm state change as sent: `kind` is the text name (`low_signal`...), `value` and `unit` null when it has none. */
export interface FeedAlarmEvent {
  readonly sampleIndex: number;
  readonly kind: string;
  readonly state: 'raised' | 'cleared';
  readonly value: number | null;
  readonly unit: FeedValueUnit | null;
  /** `calibration_stale` only: what left the calibration's model, `radius-change` or `radius-scatter`. */
  readonly cause?: ModelWatchEvent['cause'];
}

/** The time base of a message: sample rate, the sample time of its latest sample, and when it was made. */
export interface FeedTimeBase {
  /** Sample rate, Hz; null before the measurement has started. */
  readonly rateHz: number | null;
  /** `sampleIndex / rateHz`, s: the sample time of the latest sample, counted from the first (lost ones included); null before any. */
  readonly sampleTimeS: number | null;
  /** Wall-clock time the message was made, ISO 8601 UTC with milliseconds (`2026-12-02T13:07:02.123Z`). */
  readonly time: string;
}

/** One axis in an update. Numbers are SI (m, m/s); a value with no data yet is null. */
export interface FeedAxisState {
  readonly name: string;
  readonly sampleIndex: number;
  readonly samples: number;
  readonly positionM: number | null;
  readonly positionMinM: number | null;
  readonly positionMaxM: number | null;
  readonly velocityMS: number | null;
  readonly velocityMinMS: number | null;
  readonly velocityMaxMS: number | null;
  readonly level: number | null;
  readonly levelMin: number | null;
  /**
   * Alarms active on the latest sample, and all seen since the previous update (text names; `calibration_stale`
   * too, from the axis' model watch).
   */
  readonly alarms: readonly string[];
  readonly alarmsSeen: readonly string[];
  readonly countLost: boolean;
  /** Alarm changes since the previous update, by sample index (`calibration_stale`'s among them). */
  readonly events: readonly FeedAlarmEvent[];
  readonly eventsDropped: number;
  readonly trace?: Trace;
}

export interface FeedUpdateMessage extends FeedTimeBase {
  readonly type: 'update';
  readonly schema: typeof FEED_SCHEMA;
  /** Per connection (WebSocket) or per publisher (MQTT), from 1, +1 per message sent. */
  readonly seq: number;
  /** Absolute index of the latest sample (all axes share it). */
  readonly sampleIndex: number;
  readonly axes: readonly FeedAxisState[];
  /** Present when the source has a geometry (FeedSource.geometry): angles and the point of interest. */
  readonly geometry?: FeedGeometry;
}

/** Yaw, pitch (rad) and the displacement of the point of interest (m) with their standard uncertainties; null when not measured. */
export interface FeedGeometry {
  readonly yawRad: number | null;
  readonly pitchRad: number | null;
  readonly pointM: number | null;
  readonly yawUncertaintyRad: number | null;
  readonly pitchUncertaintyRad: number | null;
  readonly pointUncertaintyM: number | null;
}

/**
 * The position of one axis at one edge of a digital input (a camera trigger, a reference mark; wire format
 * version 2), sent as it is latched (docs/trigger-edges.md): one message per axis and edge.
 */
export interface FeedEdgeMessage extends FeedTimeBase {
  readonly type: 'edge';
  readonly schema: typeof FEED_SCHEMA;
  readonly axis: string;
  /** Input line: 0 trigger, 1 reference mark, 2..7 further trigger inputs. */
  readonly line: number;
  readonly edge: 'rising' | 'falling';
  /** Time of the edge as a fractional sample index from the first sample; `sampleTimeS` is it over the rate, s. */
  readonly sampleTime: number;
  /** Position and velocity at the edge (m, m/s), and the bound of the interpolation's error, m; null when unknown. */
  readonly positionM: number | null;
  readonly velocityMS: number | null;
  readonly uncertaintyM: number | null;
  /** Alarms of the samples on either side of the edge (text names). */
  readonly alarms: readonly string[];
}

/** What the feed needs of a latched edge: the core's edge position with its axis and rate (`LiveEdgePosition` has them). */
export interface FeedEdgeInput extends EdgePosition {
  readonly axis: string;
  readonly rateHz: number;
}

export function feedEdgeMessage(edge: FeedEdgeInput): FeedEdgeMessage {
  return {
    type: 'edge',
    schema: FEED_SCHEMA,
    axis: edge.axis,
    line: edge.line,
    edge: edge.rising ? 'rising' : 'falling',
    sampleTime: edge.sampleTime,
    rateHz: edge.rateHz,
    sampleTimeS: edge.sampleTime / edge.rateHz,
    time: new Date().toISOString(),
    positionM: finiteOrNull(edge.positionM),
    velocityMS: finiteOrNull(edge.velocityMS),
    uncertaintyM: finiteOrNull(edge.uncertaintyM),
    alarms: names(edge.flags),
  };
}

/**
 * Where the measurement is: `waiting` for its first samples (the feed listens from launch), `live`, `ended`
 * (the source completed normally) or `failed` (the source failed).
 */
export type FeedState = 'waiting' | 'live' | 'ended' | 'failed';

export interface FeedStatusMessage extends FeedTimeBase {
  readonly type: 'status';
  readonly schema: typeof FEED_SCHEMA;
  readonly state: FeedState;
  /** Axis names; empty while waiting. */
  readonly axes: readonly string[];
  /** The low-signal threshold of the `level` values (1 on the calibrated ellipse); null while waiting. */
  readonly lowSignalLevel: number | null;
  /** Detector outputs of each axis (2 a quadrature pair, 3 or 4 combined into one), in `axes` order; null when the source does not say. */
  readonly detectorOutputs: readonly number[] | null;
}

export interface FeedHelloMessage {
  readonly type: 'hello';
  readonly schema: typeof FEED_SCHEMA;
  /** False only when the server takes re-reference commands (`commands` then names them); they need the token. */
  readonly readOnly: boolean;
  readonly commands?: readonly 'reference'[];
  readonly state: FeedState;
  readonly axes: readonly string[];
  readonly updateHz: { readonly default: number; readonly max: number };
  readonly maxMessageBytes: number;
  /** Client messages allowed per second on average, and in one burst; beyond them the connection is closed (1008). */
  readonly maxMessagesPerS: number;
  readonly messageBurst: number;
  /** A connection that has not subscribed this long after opening is closed (1008), ms. */
  readonly subscribeTimeoutMs: number;
}

/** `refused`: a re-reference command without the right token, or one the measurement cannot carry out now. */
export type FeedErrorCode = 'malformed-json' | 'bad-message' | 'read-only' | 'source-error' | 'refused';

export interface FeedErrorMessage {
  readonly type: 'error';
  readonly code: FeedErrorCode;
  readonly message: string;
  /** The `id` of the command refused, when it had one. */
  readonly id?: string;
}

/**
 * The one command (WebSocket feed and MQTT): re-reference a running measurement. Zero an axis (or every axis) at
 * its next sample, or preset it to `presetM`; the count-lost latch clears there. Needs the measurement's token,
 * even on loopback.
 */
export interface FeedReferenceCommand {
  readonly type: 'reference';
  readonly token: string;
  /** Axis name; default every axis. */
  readonly axis?: string;
  /** Position the axis reads at its next sample, m; default 0 (a zero). */
  readonly presetM?: number;
  /** Echoed in the reply (up to 64 characters), so a client can match replies to commands. */
  readonly id?: string;
}

/** What a re-reference command asks of the measurement (after the token check). */
export interface ReferenceRequest {
  /** Axis name, or null for every axis. */
  readonly axis: string | null;
  readonly presetM: number;
  /** Who asked, for the log and the summary: e.g. `WebSocket 127.0.0.1`, `MQTT`. */
  readonly origin: string;
}

/** What the measurement did: re-referenced `axes` at absolute sample `sampleIndex`, or why it could not. */
export type ReferenceOutcome =
  | { readonly ok: true; readonly axes: readonly string[]; readonly sampleIndex: number; readonly presetM: number }
  | { readonly ok: false; readonly reason: string };

/** The reply to a command carried out. */
export interface FeedReferencedMessage {
  readonly type: 'referenced';
  readonly axes: readonly string[];
  /** Absolute index of the sample that reads `presetM`. */
  readonly sampleIndex: number;
  readonly presetM: number;
  readonly id?: string;
}

const COMMAND_FIELDS = new Set(['type', 'token', 'axis', 'presetM', 'id']);

/**
 * Checks a re-reference command and carries it out through `handler`: the reply to send. Refused (code
 * `refused`) without a configured token or without the right one; checked field by field (`bad-message`); a
 * refusal never reaches the handler, so it changes nothing. Never throws (a handler's error becomes a refusal).
 */
export function runReferenceCommand(
  record: Readonly<Record<string, unknown>>,
  token: string | undefined,
  origin: string,
  handler: (request: ReferenceRequest) => ReferenceOutcome,
): FeedReferencedMessage | FeedErrorMessage {
  const id = typeof record.id === 'string' && record.id.length <= 64 ? record.id : undefined;
  const withId = id === undefined ? {} : { id };
  const refused = (code: FeedErrorCode, message: string): FeedErrorMessage => ({ type: 'error', code, message, ...withId });
  if (token === undefined) return refused('refused', 'commands need a token and this measurement has none (give it one: --token or FRINGETALLY_FEED_TOKEN); nothing changed');
  if (typeof record.token !== 'string') return refused('refused', 'a command must carry the token ("token"); nothing changed');
  if (!tokenMatches(record.token, token)) return refused('refused', 'wrong token; nothing changed');
  for (const key of Object.keys(record)) {
    if (!COMMAND_FIELDS.has(key)) return refused('bad-message', `unknown field ${JSON.stringify(key)} in reference; nothing changed`);
  }
  if (record.id !== undefined && id === undefined) return refused('bad-message', 'id must be a string of at most 64 characters; nothing changed');
  const { axis, presetM } = record;
  if (axis !== undefined && typeof axis !== 'string') return refused('bad-message', `axis must be an axis name (got ${JSON.stringify(axis)}); nothing changed`);
  if (presetM !== undefined && !(typeof presetM === 'number' && Number.isFinite(presetM) && Math.abs(presetM) <= 1e3)) {
    return refused('bad-message', `presetM must be a number of metres in [-1000, 1000] (got ${JSON.stringify(presetM)}); nothing changed`);
  }
  let outcome: ReferenceOutcome;
  try {
    outcome = handler({ axis: axis ?? null, presetM: presetM ?? 0, origin });
  } catch (error) {
    outcome = { ok: false, reason: (error as Error).message };
  }
  if (!outcome.ok) return refused('refused', `${outcome.reason}; nothing changed`);
  return { type: 'referenced', axes: outcome.axes, sampleIndex: outcome.sampleIndex, presetM: outcome.presetM, ...withId };
}

/** What a client may send: only this. Everything else is refused; nothing a client sends reaches the measurement. */
export interface FeedSubscribeMessage {
  readonly type: 'subscribe';
  /** Updates per second. Default: the server's default; range (0, server max]. */
  readonly updateHz?: number;
  /** Include recent raw and corrected Lissajous points. Default false. */
  readonly trace?: boolean;
}

function finiteOrNull(value: number): number | null {
  return Number.isFinite(value) ? value : null;
}

function names(flags: number): string[] {
  const text = alarmText(flags);
  return text === '' ? [] : text.split(' ');
}

/**
 * The unit of an event's value, from its kind (see `FeedValueUnit`). `count_lost` raised by an input gap
 * carries the lost samples; the tracker raises it at the same sample as `input_gap`, in the same update.
 */
function unitOf(event: AlarmEvent, gapAt: ReadonlySet<number>): FeedValueUnit | null {
  if (!Number.isFinite(event.value)) return null;
  switch (event.kind) {
    case 'lowSignal':
      return 'level';
    case 'saturation':
      return 'input units';
    case 'overspeed':
      return 'rad/sample';
    case 'inputGap':
      return 'samples';
    case 'countLost':
      return gapAt.has(event.sampleIndex) ? 'samples' : 'rad';
    case 'badSample':
      return null;
    case 'lowPower':
      return 'relative power';
  }
}

export function feedEvents(events: readonly AlarmEvent[]): FeedAlarmEvent[] {
  const gapAt = new Set(events.filter((event) => event.kind === 'inputGap' && event.state === 'raised').map((event) => event.sampleIndex));
  return events.map((event) => ({
    sampleIndex: event.sampleIndex,
    kind: alarmNames[event.kind],
    state: event.state,
    value: finiteOrNull(event.value),
    unit: unitOf(event, gapAt),
  }));
}

/** A `calibration_stale` change as sent. */
function feedModelEvent(event: ModelWatchEvent): FeedAlarmEvent {
  return { sampleIndex: event.sampleIndex, kind: MODEL_WATCH_ALARM, state: event.state, value: finiteOrNull(event.value), unit: 'relative radius', cause: event.cause };
}

/** The time base at `sampleIndex` (−1 before any sample), made now. */
export function feedTimeBase(rateHz: number | null, sampleIndex: number): FeedTimeBase {
  return {
    rateHz,
    sampleTimeS: rateHz === null || sampleIndex < 0 ? null : sampleIndex / rateHz,
    time: new Date().toISOString(),
  };
}

/** One axis as sent; `withTrace` false leaves out a trace the update carries. */
export function feedAxisState(axis: AxisUpdate, withTrace = true): FeedAxisState {
  return {
    name: axis.name,
    sampleIndex: axis.sampleIndex,
    samples: axis.samples,
    positionM: finiteOrNull(axis.positionM),
    positionMinM: finiteOrNull(axis.positionMinM),
    positionMaxM: finiteOrNull(axis.positionMaxM),
    velocityMS: finiteOrNull(axis.velocityMS),
    velocityMinMS: finiteOrNull(axis.velocityMinMS),
    velocityMaxMS: finiteOrNull(axis.velocityMaxMS),
    level: finiteOrNull(axis.level),
    levelMin: finiteOrNull(axis.levelMin),
    alarms: axis.calibrationStale ? [...names(axis.flags), MODEL_WATCH_ALARM] : names(axis.flags),
    alarmsSeen: axis.calibrationStaleSeen ? [...names(axis.flagsSeen), MODEL_WATCH_ALARM] : names(axis.flagsSeen),
    countLost: axis.countLost,
    events: axis.modelEvents.length === 0 ? feedEvents(axis.events) : [...feedEvents(axis.events), ...axis.modelEvents.map(feedModelEvent)].sort((a, b) => a.sampleIndex - b.sampleIndex),
    eventsDropped: axis.eventsDropped,
    ...(axis.trace && withTrace ? { trace: roundTrace(axis.trace) } : {}),
  };
}

/** Trace points to 5 significant digits: enough for a picture, a third of the bytes. */
function roundTrace(trace: Trace): Trace {
  const r = (values: number[]) => values.map((value) => (Number.isFinite(value) ? Number(value.toPrecision(5)) : 0));
  return { x: r(trace.x), y: r(trace.y), u: r(trace.u), v: r(trace.v) };
}

export function feedUpdateMessage(update: AxesUpdate, seq: number, rateHz: number, withTrace: boolean, geometry: GeometryUpdate | null = null): FeedUpdateMessage {
  const sampleIndex = update.axes[0]!.sampleIndex;
  return {
    type: 'update',
    schema: FEED_SCHEMA,
    seq,
    sampleIndex,
    ...feedTimeBase(rateHz, sampleIndex),
    axes: update.axes.map((axis) => feedAxisState(axis, withTrace)),
    ...(geometry === null ? {} : { geometry: feedGeometry(geometry) }),
  };
}

/** A geometry result as sent: non-finite values (an angle the beams do not measure) become null. */
export function feedGeometry(geometry: GeometryUpdate): FeedGeometry {
  return {
    yawRad: finiteOrNull(geometry.yawRad),
    pitchRad: finiteOrNull(geometry.pitchRad),
    pointM: finiteOrNull(geometry.pointM),
    yawUncertaintyRad: finiteOrNull(geometry.yawUncertaintyRad),
    pitchUncertaintyRad: finiteOrNull(geometry.pitchUncertaintyRad),
    pointUncertaintyM: finiteOrNull(geometry.pointUncertaintyM),
  };
}

export type ParsedClientMessage = { readonly ok: true; readonly message: FeedSubscribeMessage } | { readonly ok: false; readonly error: FeedErrorMessage };

/** The message as an object when it is a re-reference command (`"type":"reference"`), else null; never throws. */
export function referenceCommandOf(text: string): Readonly<Record<string, unknown>> | null {
  try {
    const value: unknown = JSON.parse(text);
    return typeof value === 'object' && value !== null && !Array.isArray(value) && (value as Record<string, unknown>).type === 'reference' ? (value as Record<string, unknown>) : null;
  } catch {
    return null; // not JSON: parseClientMessage names the fault
  }
}

/** Parses and checks one client message against the schema; never throws. */
export function parseClientMessage(text: string, maxUpdateHz: number): ParsedClientMessage {
  let value: unknown;
  try {
    value = JSON.parse(text);
  } catch (error) {
    return refuse('malformed-json', `message is not valid JSON (${(error as Error).message})`);
  }
  if (typeof value !== 'object' || value === null || Array.isArray(value)) return refuse('bad-message', 'message must be a JSON object');
  const record = value as Record<string, unknown>;
  if (record.type !== 'subscribe') {
    return refuse('read-only', `the feed is read-only and accepts only {"type":"subscribe"} (got type ${JSON.stringify(record.type) ?? 'undefined'})`);
  }
  for (const key of Object.keys(record)) {
    if (key !== 'type' && key !== 'updateHz' && key !== 'trace') return refuse('bad-message', `unknown field ${JSON.stringify(key)} in subscribe`);
  }
  const { updateHz, trace } = record;
  if (updateHz !== undefined && !(typeof updateHz === 'number' && Number.isFinite(updateHz) && updateHz > 0 && updateHz <= maxUpdateHz)) {
    return refuse('bad-message', `updateHz must be a number in (0, ${maxUpdateHz}] (got ${JSON.stringify(updateHz)})`);
  }
  if (trace !== undefined && typeof trace !== 'boolean') return refuse('bad-message', `trace must be true or false (got ${JSON.stringify(trace)})`);
  return {
    ok: true,
    message: { type: 'subscribe', ...(updateHz === undefined ? {} : { updateHz }), ...(trace === undefined ? {} : { trace }) },
  };
}

function refuse(code: FeedErrorCode, message: string): ParsedClientMessage {
  return { ok: false, error: { type: 'error', code, message } };
}
