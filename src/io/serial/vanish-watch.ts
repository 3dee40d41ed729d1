// Watchdog for a serial device that vanishes while data flows. serialport 13 (bindings-cpp unixRead) retries a
// zero-byte read forever, and a pseudo-terminal whose other side died mid-stream reads zero bytes, so the port
// spins without ever emitting `close`. The watchdog notices that the device node behind the path is gone or
// replaced, and closes the port; the serial byte source then reports the link down and reopens with backoff.
import { statSync } from 'node:fs';
import { SerialPort } from 'serialport';
import type { SerialPortHandle } from './serial-source.js';

export interface VanishWatch {
  /** Opens serialport ports and watches the one last opened. */
  openPort(settings: { readonly path: string; readonly baudRate: number }): SerialPortHandle;
  /** Whether the watchdog closed this port (its device node vanished or was replaced). */
  closed(port: SerialPortHandle): boolean;
  stop(): void;
}

/** Device number of the node at `path`, or null when there is none. */
function deviceOf(path: string): number | null {
  try {
    return statSync(path).rdev;
  } catch {
    return null;
  }
}

/** Checks every `intervalMs` (default 100 ms) that the open port's path still leads to the device it opened. */
export function createVanishWatch(intervalMs = 100): VanishWatch {
  let current: { port: SerialPort; path: string; device: number | null } | null = null;
  const closedPorts = new WeakSet<SerialPortHandle>();
  const timer = setInterval(() => {
    if (current === null || current.device === null || !current.port.isOpen) return;
    if (deviceOf(current.path) === current.device) return;
    const { port } = current;
    current = null;
    closedPorts.add(port);
    // The close callback's error is the source's business: it watches the port's own events.
    port.close(() => undefined);
  }, intervalMs);
  timer.unref();
  return {
    openPort(settings) {
      const port = new SerialPort({ path: settings.path, baudRate: settings.baudRate, autoOpen: false });
      const watched = { port, path: settings.path, device: null as number | null };
      port.once('open', () => {
        watched.device = deviceOf(settings.path);
        current = watched;
      });
      return port;
    },
    closed(port) {
      return closedPorts.has(port);
    },
    stop() {
      clearInterval(timer);
      current = null;
    },
  };
}
