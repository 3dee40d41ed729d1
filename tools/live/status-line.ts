// The one-line live status of `fringetally listen` on a terminal, redrawn at most five times per second, with log
// lines printed above it. Without a terminal only the log lines are written.
import { alarmText } from '../../src/core/index.js';
import type { LinkReaderStatus } from '../../src/io/live/index.js';
import type { LiveProgress } from './live-session.js';

/** Redraws per second at most: faster is unreadable and costs terminal time at high sample rates. */
const REDRAW_INTERVAL_MS = 200;

export function formatStatus(progress: Readonly<LiveProgress>, link: Readonly<LinkReaderStatus> | null, fitSamples: number): string {
  if (link === null) return 'waiting';
  const parts = [`link ${link.link}`];
  if (progress.calibration === 'fitting') {
    parts.push(`fitting correction ${Math.min(link.samplesDelivered, fitSamples)}/${fitSamples} samples`);
  } else if (progress.samplesProcessed > 0) {
    parts.push(`${(progress.positionM * 1e6).toFixed(4)} µm`, `${(progress.velocityMS * 1e3).toFixed(4)} mm/s`, `level ${progress.level.toFixed(3)}`);
    parts.push(`alarms: ${alarmText(progress.flags) || 'none'}`);
  }
  if (link.wire !== null) parts.push(`frames ${link.wire.framesGood}`, `crc fail ${link.wire.crcFailures}`, `resyncs ${link.wire.resyncs}`);
  if (link.text !== null) parts.push(`lines ${link.text.linesGood}`, `malformed ${link.text.linesMalformed}`);
  parts.push(`gaps ${link.gaps}${link.gaps > 0 ? ` (${link.lostSamples} lost)` : ''}`);
  return parts.join(' | ');
}

/**
 * The status text cut to fit one terminal line: one column is kept free so the cursor does not wrap. A terminal
 * that reports no width (0 columns, or none) gets the whole text.
 */
export function fitToWidth(text: string, columns: number | undefined): string {
  if (columns === undefined || !(columns > 1) || text.length < columns) return text;
  return text.slice(0, columns - 1);
}

export interface StatusLine {
  /** Writes a line of log above the status line. */
  log(line: string): void;
  stop(): void;
}

export function createStatusLine(stream: NodeJS.WriteStream, draw: () => string, quiet: boolean): StatusLine {
  if (quiet) return { log() {}, stop() {} };
  if (!stream.isTTY) return { log: (line) => void stream.write(line + '\n'), stop() {} };
  let shown = false;
  const clear = () => {
    if (shown) stream.write('\r\x1b[K');
    shown = false;
  };
  const redraw = () => {
    stream.write(`\r${fitToWidth(draw(), stream.columns)}\x1b[K`);
    shown = true;
  };
  const timer = setInterval(redraw, REDRAW_INTERVAL_MS);
  timer.unref();
  return {
    log(line) {
      clear();
      stream.write(line + '\n');
      redraw();
    },
    stop() {
      clearInterval(timer);
      redraw();
      stream.write('\n');
      shown = false;
    },
  };
}
