// Byte source over a serial port (serialport 13). Reconnects with exponential backoff and reports link changes.
// A vanished device shows up only as `close` with `disconnected: true` (no `error`, no `end`), so the port's
// own events are watched, not a parser's; while the device is missing `open()` fails at once (ENOENT).

import { integerInRange, numberInRange, OptionError } from '../../core/options.js';
import { Observable } from 'rxjs';
import type { ByteSource, ByteSourceEvent, LinkEvent } from './byte-source.js';
import { createVanishWatch } from './vanish-watch.js';

/** The part of a serialport port object this source uses; lets tests pass serialport's mock or a double. */
export interface SerialPortHandle {
  readonly isOpen: boolean;
  open(callback: (error: Error | null) => void): void;
  close(callback: (error: Error | null) => void): void;
  on(event: 'data', listener: (chunk: Buffer) => void): unknown;
  on(event: 'close', listener: (error?: (Error & { disconnected?: boolean }) | null) => void): unknown;
  on(event: 'error', listener: (error: Error) => void): unknown;
}

/** The serial source's defaults, stated once (the tools' options default to them too). */
export const SERIAL_SOURCE_DEFAULTS = Object.freeze({
  /** Bd. */
  baudRate: 921600,
  /** First reopen delay, ms. */
  retryDelayMs: 200,
  /** Ceiling of the growing delay, ms (or retryDelayMs when that is longer). */
  maxRetryDelayMs: 5000,
  backoffFactor: 2,
});

export interface SerialSourceOptions {
  /** Device path, e.g. `/dev/ttyUSB0` or a pty link. Required, non-empty. */
  readonly path: string;
  /** Baud rate in Bd; integer 1..20 000 000. Default 921600. */
  readonly baudRate?: number;
  /** Delay before the first reopen attempt after a failure or disconnect, ms; 1..600 000. Default 200. */
  readonly retryDelayMs?: number;
  /** Ceiling of the growing delay, ms; retryDelayMs..600 000. Default 5000. */
  readonly maxRetryDelayMs?: number;
  /** Each failed attempt multiplies the delay by this; 1..10. Default 2. */
  readonly backoffFactor?: number;
  /**
   * Consecutive failed open attempts tolerated before the observable errors; integer ≥ 0 or Infinity.
   * Default Infinity (keep waiting for the device).
   */
  readonly maxRetries?: number;
  /**
   * Failed open attempts tolerated while the port has never opened (a mistyped path, a device not plugged in)
   * before the observable errors; integer ≥ 0 or Infinity. Default `maxRetries`. Once the port opened,
   * `maxRetries` applies.
   */
  readonly maxRetriesBeforeFirstOpen?: number;
  /** Makes the port object (closed; the source opens it). Default: `new SerialPort({ path, baudRate, autoOpen: false })`. */
  readonly openPort?: (settings: { readonly path: string; readonly baudRate: number }) => SerialPortHandle;
}

export interface SerialSourceConfig {
  readonly path: string;
  readonly baudRate: number;
  readonly retryDelayMs: number;
  readonly maxRetryDelayMs: number;
  readonly backoffFactor: number;
  readonly maxRetries: number;
  readonly maxRetriesBeforeFirstOpen: number;
}

export function resolveSerialSourceOptions(options: SerialSourceOptions): SerialSourceConfig {
  if (typeof options.path !== 'string' || options.path === '') {
    throw new OptionError('path', 'a non-empty string', options.path);
  }
  const defaults = SERIAL_SOURCE_DEFAULTS;
  const baudRate = integerInRange('baudRate', options.baudRate ?? defaults.baudRate, 1, 20_000_000);
  const retryDelayMs = numberInRange('retryDelayMs', options.retryDelayMs ?? defaults.retryDelayMs, 1, 600_000);
  const maxRetryDelayMs = numberInRange('maxRetryDelayMs', options.maxRetryDelayMs ?? Math.max(defaults.maxRetryDelayMs, retryDelayMs), retryDelayMs, 600_000);
  const backoffFactor = numberInRange('backoffFactor', options.backoffFactor ?? defaults.backoffFactor, 1, 10);
  const retries = (name: string, value: number): number => {
    if (!(value === Number.POSITIVE_INFINITY || (Number.isInteger(value) && value >= 0))) {
      throw new OptionError(name, 'an integer >= 0 or Infinity', value);
    }
    return value;
  };
  const maxRetries = retries('maxRetries', options.maxRetries ?? Number.POSITIVE_INFINITY);
  const maxRetriesBeforeFirstOpen = retries('maxRetriesBeforeFirstOpen', options.maxRetriesBeforeFirstOpen ?? maxRetries);
  return Object.freeze({ path: options.path, baudRate, retryDelayMs, maxRetryDelayMs, backoffFactor, maxRetries, maxRetriesBeforeFirstOpen });
}


/** Delay before reopen attempt `attempt` (1 = first retry), ms. */
export function retryDelayFor(config: SerialSourceConfig, attempt: number): number {
  return Math.min(config.retryDelayMs * config.backoffFactor ** (attempt - 1), config.maxRetryDelayMs);
}

export interface SerialByteSource extends ByteSource {
  readonly config: SerialSourceConfig;
}

export function createSerialByteSource(options: SerialSourceOptions): SerialByteSource {
  const config = resolveSerialSourceOptions(options);
  const name = `${config.path} @ ${config.baudRate} Bd`;

  function open(): Observable<ByteSourceEvent> {
    return new Observable<ByteSourceEvent>((subscriber) => {
      // serialport alone misses a device that dies while data flows (see vanish-watch.ts): watch its node.
      const watch = options.openPort === undefined ? createVanishWatch() : null;
      const openPort = options.openPort ?? watch!.openPort;
      let port: SerialPortHandle | null = null;
      let retryTimer: ReturnType<typeof setTimeout> | null = null;
      let stopped = false;
      let everUp = false;
      let linkState: 'unknown' | 'up' | 'down' = 'unknown';
      let failures = 0;
      let lastDownReason = '';

      function link(state: 'up' | 'down', reason: string, gap: boolean): void {
        const event: LinkEvent = { kind: 'link', state, timeMs: Date.now(), reason, gap, attempt: failures };
        subscriber.next(event);
      }

      function reportDown(reason: string): void {
        // One event per outage, plus one whenever the cause changes (e.g. ENOENT turns into EACCES).
        if (linkState === 'down' && reason === lastDownReason) return;
        linkState = 'down';
        lastDownReason = reason;
        link('down', reason, false);
      }

      function scheduleRetry(): void {
        retryTimer = setTimeout(() => {
          retryTimer = null;
          connect();
        }, retryDelayFor(config, Math.max(failures, 1)));
      }

      function openFailed(error: Error): void {
        failures++;
        reportDown(`open failed: ${error.message}`);
        if (failures > (everUp ? config.maxRetries : config.maxRetriesBeforeFirstOpen)) {
          stopped = true;
          const never = everUp ? '' : ' (it never opened: check the path)';
          subscriber.error(new Error(`${name}: gave up after ${failures} failed open attempts${never}; last error: ${error.message}`));
          return;
        }
        scheduleRetry();
      }

      function lost(candidate: SerialPortHandle, reason: string): void {
        // Events of a port already given up (or of a stopped source) are stale.
        if (stopped || candidate !== port) return;
        port = null;
        if (candidate.isOpen) {
          candidate.close((error) => {
            if (error !== null && !stopped) reportDown(`close failed: ${error.message}`);
          });
        }
        reportDown(reason);
        scheduleRetry();
      }

      function connect(): void {
        if (stopped) return;
        let candidate: SerialPortHandle;
        try {
          candidate = openPort({ path: config.path, baudRate: config.baudRate });
        } catch (error) {
          openFailed(error as Error);
          return;
        }
        port = candidate;
        candidate.on('data', (chunk) => {
          if (!stopped && candidate === port) subscriber.next(chunk);
        });
        candidate.on('error', (error) => lost(candidate, `error: ${error.message}`));
        candidate.on('close', (error) =>
          lost(candidate, error?.disconnected ? 'disconnected' : watch?.closed(candidate) ? 'vanished' : 'closed'),
        );
        candidate.open((error) => {
          if (stopped) {
            // Unsubscribed while opening: close what just opened; nobody is listening for a failure any more.
            if (error === null) candidate.close(() => undefined);
            return;
          }
          if (candidate !== port) return;
          if (error !== null) {
            port = null;
            openFailed(error);
            return;
          }
          const gap = everUp;
          everUp = true;
          linkState = 'up';
          link('up', 'opened', gap);
          failures = 0;
        });
      }

      connect();
      return () => {
        stopped = true;
        watch?.stop();
        if (retryTimer !== null) clearTimeout(retryTimer);
        const current = port;
        port = null;
        // After unsubscribe there is no subscriber to report a close failure to.
        if (current !== null && current.isOpen) current.close(() => undefined);
      };
    });
  }

  return { name, config, open };
}
