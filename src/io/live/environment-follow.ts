// An environment log followed while a live run goes on (an rxjs stream of its schedules). Apart from the capture
// readers' parsing (capture/environment-log.ts), so that reading files never loads rxjs.

import { unwatchFile, watchFile } from 'node:fs';
import { readFile } from 'node:fs/promises';
import { Observable } from 'rxjs';
import { integerInRange, type EnvironmentSchedule } from '../../core/index.js';
import { parseEnvironmentLog } from '../capture/environment-log.js';

/**
 * Follows an environment log that a sensor appends to during a live run: the schedule of its complete lines now,
 * and again each time it changes (checked every `intervalMs`, default 500 ms, 10..60000). A line still being
 * written (no newline yet) waits for its newline. The stream errors (file and line named) when the file cannot
 * be read or a line is malformed; it never completes by itself.
 */
export function followEnvironmentLog(path: string, options: { readonly intervalMs?: number } = {}): Observable<EnvironmentSchedule> {
  const intervalMs = integerInRange('intervalMs', options.intervalMs ?? 500, 10, 60_000);
  return new Observable<EnvironmentSchedule>((subscriber) => {
    let complete = '';
    let reading = false;
    let again = false;
    const read = async (): Promise<void> => {
      if (reading) {
        again = true; // a change during the read: read once more after it
        return;
      }
      reading = true;
      try {
        do {
          again = false;
          let text: string;
          try {
            text = await readFile(path, 'utf8');
          } catch (error) {
            throw new Error(`${path}: cannot read the environment log (${(error as Error).message})`);
          }
          const lines = text.slice(0, text.lastIndexOf('\n') + 1);
          if (lines !== complete && !subscriber.closed) {
            complete = lines;
            subscriber.next(parseEnvironmentLog(lines, path));
          }
        } while (again && !subscriber.closed);
      } catch (error) {
        subscriber.error(error);
      } finally {
        reading = false;
      }
    };
    const onChange = () => void read();
    watchFile(path, { interval: intervalMs, persistent: false }, onChange);
    void read();
    return () => unwatchFile(path, onChange);
  });
}
