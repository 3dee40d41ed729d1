// Which blocks a long run's statistical analyses look at (createAnalysisSchedule). Check values are counts that
// follow from the stated rule (every n-th block, n = ⌈blocks / budget blocks⌉), worked out beside each check.
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import '../support/property-seed.js';
import { createAnalysisSchedule, OptionError } from '../../src/core/index.js';

function taken(schedule: ReturnType<typeof createAnalysisSchedule>, blocks: number): number[] {
  const indices: number[] = [];
  for (let b = 0; b < blocks; b++) if (schedule.take(b)) indices.push(b);
  return indices;
}

describe('analysis schedule', () => {
  it('takes every block of a run within the budget', () => {
    const schedule = createAnalysisSchedule({ blockSamples: 4096, totalSamples: 2 ** 20, budgetSamples: 2 ** 20 });
    expect(taken(schedule, 256)).toHaveLength(256);
    expect(schedule.every).toBe(1);
  });

  it('spreads the budget evenly over a run of known length', () => {
    // 3e7 samples = 7325 blocks of 4096 (the last one short); 256 blocks of budget → every ⌈7325/256⌉ = 29th block.
    const schedule = createAnalysisSchedule({ blockSamples: 4096, totalSamples: 3e7, budgetSamples: 2 ** 20 });
    const indices = taken(schedule, 7325);
    expect(schedule.every).toBe(29);
    expect(indices).toHaveLength(Math.ceil(7325 / 29));
    expect(indices.every((index, k) => index === 29 * k)).toBe(true);
    fc.assert(
      fc.property(fc.integer({ min: 0, max: 1e9 }), fc.integer({ min: 1, max: 64 }), (total, budgetBlocks) => {
        const s = createAnalysisSchedule({ blockSamples: 1000, totalSamples: total, budgetSamples: budgetBlocks * 1000 });
        const blocks = Math.ceil(total / 1000);
        let count = 0;
        for (let b = 0; b < Math.min(blocks, 70 * s.every); b++) if (s.take(b)) count++;
        // Within the budget, and never more than one stride short of it.
        const all = Math.ceil(blocks / s.every);
        expect(all).toBeLessThanOrEqual(budgetBlocks);
        if (s.every > 1) expect(all * s.every).toBeGreaterThanOrEqual(blocks - s.every);
        expect(count).toBe(Math.min(all, Math.ceil(Math.min(blocks, 70 * s.every) / s.every)));
      }),
    );
  });

  it('of a run of unknown length, takes the budget and then doubles its stride as the run doubles', () => {
    const schedule = createAnalysisSchedule({ blockSamples: 10, totalSamples: null, budgetSamples: 80 });
    // Budget 8 blocks: blocks 0–7 all, 8–15 every 2nd, 16–31 every 4th, 32–63 every 8th: 8 + 4 + 4 + 4 = 20.
    const indices = taken(schedule, 64);
    expect(indices.slice(0, 12)).toEqual([0, 1, 2, 3, 4, 5, 6, 7, 8, 10, 12, 14]);
    expect(indices).toHaveLength(20);
    expect(schedule.every).toBe(8);
    schedule.reset();
    expect(schedule.every).toBe(1);
  });

  it('refuses a budget under one block', () => {
    expect(() => createAnalysisSchedule({ blockSamples: 4096, totalSamples: null, budgetSamples: 100 })).toThrow(OptionError);
    expect(() => createAnalysisSchedule({ blockSamples: 4096, totalSamples: null, budgetSamples: 100 })).toThrow(/budgetSamples/);
  });
});
