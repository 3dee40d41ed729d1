// Preloaded (`node --import`) into a tool process the benchmark starts: at exit it writes the process's own CPU
// time (all its threads) and peak resident memory as JSON to file descriptor 3, which the benchmark reads. A
// preload runs in every worker thread too: only the main thread reports.
import { writeSync } from 'node:fs';
import { isMainThread } from 'node:worker_threads';

if (isMainThread) {
  process.on('exit', () => {
    const usage = process.resourceUsage();
    writeSync(3, JSON.stringify({ cpuSeconds: (usage.userCPUTime + usage.systemCPUTime) / 1e6, maxRssKiB: usage.maxRSS }));
  });
}
