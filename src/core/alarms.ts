// Alarm kinds, their per-sample flag bits and the event record raised/cleared beside the data.

/**
 * One bit per alarm in the per-sample flag bytes that the pipeline writes beside each output sample.
 * A set bit means the alarm is active on that sample.
 */
export const AlarmBit = {
  /** Normalised signal level below its threshold: beam blocked, misaligned or detector failing. */
  lowSignal: 1,
  /** A raw sample at or beyond the ADC's full scale: clipped signal, distorted phase. */
  saturation: 2,
  /** A non-finite raw sample (NaN or ±Infinity): the phase of that sample is unknown. */
  badSample: 4,
  /** Phase step per sample above the overspeed threshold (default a quarter fringe per sample). */
  overspeed: 8,
  /** Samples were lost in transport before this sample (sequence gap, link down). */
  inputGap: 16,
  /** Latched: a fringe may have been missed, the position is not trustworthy until re-referenced. */
  countLost: 32,
  /** Source power (three or more outputs per axis) below its threshold: light blocked, source failing. */
  lowPower: 64,
} as const;

export type AlarmKind = keyof typeof AlarmBit;

/** The alarm kinds in bit order. */
export const alarmKinds = Object.keys(AlarmBit) as readonly AlarmKind[];

/**
 * Names used in text output (CSV, JSONL, logs): the kind in snake case (lowSignal → low_signal, countLost →
 * count_lost). Derived rather than listed, which keeps the embedded bundle within its budget.
 */
export const alarmNames = Object.fromEntries(
  alarmKinds.map((kind) => [kind, kind.replace(/[A-Z]/g, (letter) => `_${letter.toLowerCase()}`)]),
) as Readonly<Record<AlarmKind, string>>;

/** A change of an alarm's state. `sampleIndex` is absolute: samples since the start or the last reset. */
export interface AlarmEvent {
  readonly sampleIndex: number;
  readonly kind: AlarmKind;
  readonly state: 'raised' | 'cleared';
  /** The quantity that crossed the threshold (level, step in rad, lost samples...), or NaN when none applies. */
  readonly value: number;
}

/** Records a change of an alarm's state. Allocates one event, only when a state changes. */
export function pushAlarm(events: AlarmEvent[], sampleIndex: number, kind: AlarmKind, raised: boolean, value: number): void {
  events.push({ sampleIndex, kind, state: raised ? 'raised' : 'cleared', value });
}

/** The text names of the alarms set in one flag byte, separated by spaces; empty when none. */
export function alarmText(flags: number): string {
  if (flags === 0) return '';
  let text = '';
  for (const kind of alarmKinds) {
    if ((flags & AlarmBit[kind]) !== 0) text = text === '' ? alarmNames[kind] : `${text} ${alarmNames[kind]}`;
  }
  return text;
}
