// Progress on stderr for long files: a bar when stderr is a terminal (cli-progress), nothing otherwise or with --quiet.
// The bar's package is loaded only when a bar is drawn: it costs a scripted (quiet or piped) run tens of ms of start-up.
import { createRequire } from 'node:module';
import type cliProgressModule from 'cli-progress';

const require = createRequire(import.meta.url);

export interface Progress {
  /** `total` in samples, or null when the file does not say (the bar then shows a count only). */
  start(label: string, total: number | null): void;
  update(samples: number): void;
  stop(): void;
}

const silent: Progress = { start() {}, update() {}, stop() {} };

export function createProgress(quiet: boolean): Progress {
  if (quiet || !process.stderr.isTTY) return silent;
  const cliProgress = require('cli-progress') as typeof cliProgressModule;
  let bar: cliProgressModule.SingleBar | null = null;
  let lastUpdate = 0;
  let latest = 0;
  return {
    start(label, total) {
      bar = new cliProgress.SingleBar(
        {
          format: total === null ? `${label} | {value} samples` : `${label} [{bar}] {percentage}% | {value}/{total} samples`,
          stream: process.stderr,
          hideCursor: true,
        },
        cliProgress.Presets.shades_classic,
      );
      bar.start(total ?? 0, 0);
    },
    update(samples) {
      latest = samples;
      // Redrawing is costly; a few times per million samples is plenty.
      if (bar !== null && samples - lastUpdate >= 262_144) {
        bar.update(samples);
        lastUpdate = samples;
      }
    },
    stop() {
      bar?.update(latest); // the bar ends where the file did
      bar?.stop();
      bar = null;
      lastUpdate = 0;
      latest = 0;
    },
  };
}
