// The analysis thread's worker started ahead of its run (`replay` starts it while the command loads): apart from
// capture-analysis-thread.ts so that starting it loads nothing else first.

import { availableParallelism } from 'node:os';
import { Worker } from 'node:worker_threads';

/**
 * Whether a worker can run the analyses here: only the compiled tools have the worker's script beside them (not
 * sources run through a TypeScript loader), and on one core it would only take turns with the pipeline.
 */
export function analysisThreadAvailable(): boolean {
  return import.meta.url.endsWith('.js') && availableParallelism() >= 2;
}

/** A worker started ahead of its run (prepareAnalysisThread), and its failure to start, if any. */
let prepared: { readonly worker: Worker; failure: Error | null } | null = null;

/** The worker of capture-analysis-thread.ts (the compiled capture-analysis-worker.js beside this file). */
export function createAnalysisWorker(): Worker {
  return new Worker(new URL('./capture-analysis-worker.js', import.meta.url));
}

/**
 * Starts the worker ahead of a run that may take it: it then loads its code (about 0.1 s) while the command loads
 * and reads its inputs, not while the pipeline waits with a full ring. Until a run takes it, it does not keep the
 * process alive; an unused one ends with the process.
 */
export function prepareAnalysisThread(): void {
  if (prepared !== null || !analysisThreadAvailable()) return;
  const worker = createAnalysisWorker();
  worker.unref();
  const ahead: { worker: Worker; failure: Error | null } = { worker, failure: null };
  // Seen by the run that takes it (see startAnalysisThread); without a listener an error would end the process.
  worker.on('error', (error) => {
    ahead.failure ??= error;
  });
  worker.on('exit', (code) => {
    ahead.failure ??= new Error(`capture analyses: the worker thread stopped (exit code ${code}) before its run`);
  });
  prepared = ahead;
}

/** The worker prepared, if any (then no longer prepared), with its failure to start, if any. */
export function takePreparedWorker(): { readonly worker: Worker; readonly failure: Error | null } | null {
  const ahead = prepared;
  prepared = null;
  return ahead;
}
