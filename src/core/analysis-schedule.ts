// Which blocks of a long run the statistical analyses (periodic error, radius residual) look at. They cost a few
// hundred nanoseconds a sample, ten times the whole signal chain, while their results are averages that settle
// long before a capture of 10^7 samples ends: past a budget of analysed samples, every n-th block is enough.
// Whole blocks keep consecutive samples together, which the windowed fits and the noise estimate need.

import { integerInRange } from './options.js';

export interface AnalysisScheduleOptions {
  /** Samples per block (every block but the last full). Integer 1..2^31. */
  readonly blockSamples: number;
  /** Samples of the whole run when known beforehand (a file's length), else null. */
  readonly totalSamples: number | null;
  /** Samples analysed in a run before blocks are left out. Default 2^20; integer ≥ blockSamples (up to 2^53 − 1). */
  readonly budgetSamples?: number;
}

export interface AnalysisSchedule {
  /** Whether block `blockIndex` (0, 1, 2 … in order) is analysed. */
  take(blockIndex: number): boolean;
  /** The largest stride used so far: 1 while every block is analysed. */
  readonly every: number;
  reset(): void;
}

/**
 * Known length: every `every`-th block, `every` = ⌈blocks / budget blocks⌉, spread evenly over the run, so the
 * analysed share is the same in every part of it. Unknown length (a text capture): every block up to the budget,
 * then the stride doubles each time the run doubles (so the analysed samples grow with the logarithm of the
 * length, and later parts weigh less).
 */
export function createAnalysisSchedule(options: AnalysisScheduleOptions): AnalysisSchedule {
  const blockSamples = integerInRange('blockSamples', options.blockSamples, 1, 2 ** 31);
  const budgetSamples = integerInRange('budgetSamples', options.budgetSamples ?? 2 ** 20, blockSamples, Number.MAX_SAFE_INTEGER);
  const total = options.totalSamples === null ? null : integerInRange('totalSamples', options.totalSamples, 0, Number.MAX_SAFE_INTEGER);
  const budgetBlocks = Math.floor(budgetSamples / blockSamples);
  const fixed = total === null ? 0 : Math.max(1, Math.ceil(Math.ceil(total / blockSamples) / budgetBlocks));
  let every = Math.max(1, fixed);
  return {
    take(blockIndex) {
      if (fixed > 0) return blockIndex % fixed === 0;
      while (blockIndex >= budgetBlocks * every) every *= 2;
      return blockIndex % every === 0;
    },
    get every() {
      return every;
    },
    reset() {
      every = Math.max(1, fixed);
    },
  };
}
