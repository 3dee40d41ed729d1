// The local controls of a running `fringetally listen`: keys on the terminal (when stdin is one) and signals for
// scripts. Each re-references through the one chain (`LiveAxes.reReference`); nothing here decides a position.
import { fstatSync, readFileSync } from 'node:fs';
import type { LiveAxes, LiveReference } from '../../src/io/live/index.js';
import type { ReferenceOutcome, ReferenceRequest } from '../../src/io/feed/index.js';

/** Keys read on the terminal; Ctrl-C still stops (raw mode turns it into a byte, not a signal). */
export const CONTROL_KEYS = { zero: 'z', preset: 'p', stop: 'q' } as const;
/** Signals for scripts: zero, and preset to `--preset-mm`. */
export const ZERO_SIGNAL = 'SIGUSR1';
export const PRESET_SIGNAL = 'SIGUSR2';
const CTRL_C = '\u0003';

/** What a re-reference request gets: done, or refused with the reason (nothing changed). */
export function referenceOutcome(axes: LiveAxes, request: { readonly axis?: string | number; readonly presetM: number; readonly origin: string }): ReferenceOutcome {
  let done: LiveReference | null;
  try {
    done = axes.reReference(request);
  } catch (error) {
    return { ok: false, reason: (error as Error).message };
  }
  if (done === null) return { ok: false, reason: 'no position yet (no samples, or the live fit still holds the first ones)' };
  return { ok: true, axes: done.axes, sampleIndex: done.sampleIndex, presetM: done.presetM };
}

/** The feed's and the MQTT publisher's commands, on the same chain. */
export function commandHandler(axes: LiveAxes): (request: ReferenceRequest) => ReferenceOutcome {
  return (request) => referenceOutcome(axes, { ...(request.axis === null ? {} : { axis: request.axis }), presetM: request.presetM, origin: request.origin });
}

export interface LiveControls {
  /** How to use them, for the log: the keys (on a terminal) and the signals. */
  readonly help: string;
  /** Restores the terminal and removes the signal handlers. */
  dispose(): void;
}

/**
 * Starts the controls: `z` (or SIGUSR1) zeroes every axis at its next sample, `p` (or SIGUSR2) presets it to
 * `presetM` when given, `q` and Ctrl-C call `stop`. Keys only when `stdin` is a terminal and listen is not a
 * background job on it (it is put in raw mode and restored by `dispose`).
 */
export function startLiveControls(options: {
  readonly axes: LiveAxes;
  readonly stdin: NodeJS.ReadStream;
  readonly presetM: number | undefined;
  readonly stop: () => void;
  readonly log: (line: string) => void;
}): LiveControls {
  const { axes, stdin, presetM, stop, log } = options;
  const presetText = presetM === undefined ? '' : `${formatMm(presetM)} mm`;
  const act = (what: 'zero' | 'preset', origin: string) => {
    if (what === 'preset' && presetM === undefined) {
      log(`${origin}: no --preset-mm given, nothing changed`);
      return;
    }
    const outcome = referenceOutcome(axes, { presetM: what === 'zero' ? 0 : presetM!, origin });
    // Done: the chain's reference event is logged where every re-reference is.
    if (!outcome.ok) log(`${origin}: cannot re-reference: ${outcome.reason}; nothing changed`);
  };
  const onZero = () => act('zero', ZERO_SIGNAL);
  const onPreset = () => act('preset', PRESET_SIGNAL);
  process.on(ZERO_SIGNAL, onZero);
  process.on(PRESET_SIGNAL, onPreset);
  const keys = stdin.isTTY === true && inForeground((stdin as NodeJS.ReadStream & { fd: number }).fd);
  const onData = (chunk: Buffer | string) => {
    for (const key of chunk.toString()) {
      if (key === CONTROL_KEYS.zero) act('zero', `key ${key}`);
      else if (key === CONTROL_KEYS.preset) act('preset', `key ${key}`);
      else if (key === CONTROL_KEYS.stop || key === CTRL_C) stop();
    }
  };
  if (keys) {
    stdin.setRawMode(true);
    stdin.on('data', onData);
    stdin.resume();
  }
  const preset = presetM === undefined ? 'preset: give --preset-mm' : `preset to ${presetText}`;
  const help = keys
    ? `keys: ${CONTROL_KEYS.zero} zero, ${CONTROL_KEYS.preset} ${preset}, ${CONTROL_KEYS.stop} or Ctrl-C stop; signals: ${ZERO_SIGNAL} zero, ${PRESET_SIGNAL} ${preset}`
    : `signals: ${ZERO_SIGNAL} zero, ${PRESET_SIGNAL} ${preset}`;
  return {
    help,
    dispose() {
      process.off(ZERO_SIGNAL, onZero);
      process.off(PRESET_SIGNAL, onPreset);
      if (keys) {
        stdin.off('data', onData);
        stdin.setRawMode(false);
        stdin.pause();
      }
    },
  };
}

function formatMm(valueM: number): string {
  return String(Number((valueM * 1e3).toPrecision(12)));
}

/**
 * False when `fd` is the controlling terminal and this process is a background job on it (`listen … &`): raw
 * mode or a read would stop it (SIGTTOU, SIGTTIN) and take the terminal from the shell. Linux tells through
 * /proc/self/stat (pgrp, tty_nr, tpgid; proc(5)); where it cannot be read, foreground is assumed.
 */
function inForeground(fd: number): boolean {
  let stat: string;
  try {
    stat = readFileSync('/proc/self/stat', 'utf8');
  } catch {
    return true; // no /proc (not Linux): assumed, as stated above
  }
  const fields = stat.slice(stat.lastIndexOf(')') + 2).split(' ');
  const [pgrp, ttyNr, tpgid] = [Number(fields[2]), Number(fields[4]), Number(fields[5])];
  // A terminal that is not the controlling one has no job control: keys are safe on it.
  if (ttyNr !== fstatSync(fd).rdev) return true;
  return tpgid === pgrp;
}
