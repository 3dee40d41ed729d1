// The ring's slot picker (tools/capture-analysis-thread.ts createSlotPicker): for any interleaving of the pipeline's
// side (take, hand over) and the worker's (read in order), a block never takes a slot still in flight, the worker
// finds each block in the slot it was written to, and a worker that keeps up leaves the pipeline on one slot. The
// check values are the model's own bookkeeping.
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import '../support/property-seed.js';
import { createSlotPicker } from '../../tools/capture-analysis-thread.js';

describe('the ring\'s slot picker', () => {
  it('never hands out a slot in flight, and the worker reads each block from its slot, for any interleaving', () => {
    fc.assert(
      fc.property(fc.integer({ min: 1, max: 9 }), fc.array(fc.boolean(), { minLength: 1, maxLength: 400 }), (slots, moves) => {
        const order = new Int32Array(slots);
        const picker = createSlotPicker(order);
        const slotOfBlock: number[] = [];
        let written = 0;
        let read = 0;
        for (const produce of moves) {
          if (produce && written - read < slots) {
            const slot = picker.take(read);
            expect(picker.take(read)).toBe(slot); // the same until handed over
            const inFlight = slotOfBlock.slice(read, written);
            expect(inFlight).not.toContain(slot);
            expect(slot).toBeGreaterThanOrEqual(0);
            expect(slot).toBeLessThan(slots);
            slotOfBlock.push(slot);
            picker.handOver(written++);
          } else if (read < written) {
            expect(order[read % slots]).toBe(slotOfBlock[read]);
            read++;
          }
        }
      }),
      { numRuns: 200 },
    );
  });

  it('a worker that reads each block before the next leaves the pipeline writing one slot', () => {
    const order = new Int32Array(64);
    const picker = createSlotPicker(order);
    const taken = new Set<number>();
    for (let block = 0; block < 500; block++) {
      taken.add(picker.take(block));
      picker.handOver(block);
    }
    expect([...taken]).toEqual([0]);
  });
});
