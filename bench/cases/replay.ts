// Replay throughput from a file (the whole pipeline plus reading, CSV and WAV) and peak memory while replaying a
// large capture: it must not grow with the file. Captures are invented test scenarios made by `simulate`.
import { mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { simulate } from '../../tools/commands/simulate.js';
import { runCapture } from '../../tools/capture-run.js';
import { fitCapture } from '../../tools/fit-capture.js';
import { createProgress } from '../../tools/progress.js';
import type { BenchResult } from '../harness.js';

const settings = { wavelengthM: 632.9908e-9, fold: 2, refractiveIndex: 1 };
const quiet = createProgress(true);

async function makeCapture(path: string, samples: number): Promise<void> {
  const code = await simulate.run(['--out', path, '--duration-s', String(samples / 1e6), '--motion', 'vibration', '--amplitude-m', '5e-6', '--frequency-hz', '50', '--quiet']);
  if (code !== 0) throw new Error(`simulate failed for ${path}`);
}

async function replayOnce(path: string): Promise<{ seconds: number; samples: number; peakRssGrowthBytes: number; peakHeapGrowthBytes: number }> {
  const { fit } = await fitCapture(path, {}, {}, quiet);
  if (!fit.ok) throw new Error(fit.message);
  (globalThis as { gc?: () => void }).gc?.();
  const before = process.memoryUsage();
  let peakRss = before.rss;
  let peakHeap = before.heapUsed;
  const watch = setInterval(() => {
    const now = process.memoryUsage();
    peakRss = Math.max(peakRss, now.rss);
    peakHeap = Math.max(peakHeap, now.heapUsed);
  }, 20);
  const start = process.hrtime.bigint();
  const result = await runCapture(path, { open: {}, calibration: fit.calibration, settings, progress: quiet });
  const seconds = Number(process.hrtime.bigint() - start) / 1e9;
  clearInterval(watch);
  return { seconds, samples: result.samples, peakRssGrowthBytes: peakRss - before.rss, peakHeapGrowthBytes: peakHeap - before.heapUsed };
}

/** Replay cases; `memorySamples` sets the size of the large-capture case (1e8 for the full-size check). */
export async function replayCases(options: { samples?: number; memorySamples?: number } = {}): Promise<BenchResult[]> {
  const samples = options.samples ?? 2e6;
  const memorySamples = options.memorySamples ?? 8e6;
  const dir = await mkdtemp(join(tmpdir(), 'fringetally-replay-bench-'));
  const results: BenchResult[] = [];
  try {
    for (const format of ['wav', 'csv'] as const) {
      const path = join(dir, `capture.${format}`);
      await makeCapture(path, samples);
      await replayOnce(path); // warm-up
      const runs = [await replayOnce(path), await replayOnce(path), await replayOnce(path)].sort((a, b) => a.seconds - b.seconds);
      const run = runs[1]!;
      results.push({ name: `replay/${format}/int16/${samples}`, samplesPerSecond: run.samples / run.seconds, nsPerSample: (run.seconds * 1e9) / run.samples, passes: 3 });
    }
    const large = join(dir, 'large.wav');
    await makeCapture(large, memorySamples);
    const run = await replayOnce(large);
    results.push({
      name: `replay/wav/int16/${memorySamples}/memory`,
      samplesPerSecond: run.samples / run.seconds,
      nsPerSample: (run.seconds * 1e9) / run.samples,
      passes: 1,
      extra: { samples: run.samples, peakRssGrowthBytes: run.peakRssGrowthBytes, peakHeapGrowthBytes: run.peakHeapGrowthBytes },
    });
  } finally {
    await rm(dir, { recursive: true, force: true });
  }
  return results;
}
