// The worker of capture-analysis-thread.ts: takes blocks from the shared ring in order, analyses them, frees their
// slots, and posts the results once the pipeline's side asks to finish and every block is done.

import { parentPort } from 'node:worker_threads';
import { createCaptureAnalyses, type AnalysisConfig } from './capture-analyses.js';
import { blockInSlot, ringOf, SUMMARY_LANES_AT, WORKER_CONTROL } from './capture-analysis-thread.js';
import { createSharedBlockSummary } from '../src/accel/axis-kernels.js';

const { WRITTEN, READ, FINISH, WORKER_WAITING, PIPELINE_WAITING, WORKER_POLL_MS } = WORKER_CONTROL;
// The run comes as the first message: the worker may have been started ahead of it (prepareAnalysisThread).
type Run = { config: AnalysisConfig; buffer: SharedArrayBuffer; memory: WebAssembly.Memory | null; base: number; slots: number };
const { config, buffer, memory, base, slots: count } = await new Promise<Run>((resolve) => parentPort!.once('message', resolve));
const { control, order, slots } = ringOf(buffer, base, count);

try {
  // The block summary in place over the ring where its memory allows, else over copies.
  const analyses = createCaptureAnalyses(config, memory === null ? null : createSharedBlockSummary(memory, base + SUMMARY_LANES_AT));
  let read = 0;
  for (;;) {
    const written = Atomics.load(control, WRITTEN);
    if (read < written) {
      const slot = slots[order[read % slots.length]!]!;
      if (slot.header[5] === 1) analyses.skip(slot.header[1]!);
      else analyses.add(blockInSlot(slot));
      read++;
      Atomics.store(control, READ, read);
      const awaited = Atomics.load(control, PIPELINE_WAITING);
      if (awaited !== 0 && read >= awaited) Atomics.notify(control, READ);
      continue;
    }
    // Every block handed over is done: finished if asked, else wait for the next. The pipeline's side wakes this
    // thread only at the end or when its ring is nearly full: it looks again by itself after WORKER_POLL_MS.
    if (Atomics.load(control, FINISH) === 1 && Atomics.load(control, WRITTEN) === read) break;
    // The flag first, then the count again, so a block handed over in between is not slept through.
    Atomics.store(control, WORKER_WAITING, 1);
    if (Atomics.load(control, WRITTEN) === written) Atomics.wait(control, WRITTEN, written, WORKER_POLL_MS);
    Atomics.store(control, WORKER_WAITING, 0);
  }
  parentPort!.postMessage({ results: analyses.finish() });
} catch (caught) {
  const error = caught instanceof Error ? caught : new Error(String(caught));
  parentPort!.postMessage({ error: { message: error.message, stack: error.stack } });
}
