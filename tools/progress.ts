// Progress on stderr for long files: a bar when stderr is a terminal (cli-progress), nothing otherwise or with --quiet.
import cliProgress from 'cli-progress';

export interface Progress {
  /** `total` in samples, or null when the file does not say (the bar then shows a count only). */
  start(label: string, total: number | null): void;
  update(samples: number): void;
  stop(): void;
}

const silent: Progress = { start() {}, update() {}, stop() {} };

export function createProgress(quiet: boolean): Progress {
  if (quiet || !process.stderr.isTTY) return silent;
  let bar: cliProgress.SingleBar | null = null;
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
