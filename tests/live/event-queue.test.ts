// listen's input queue (tools/live/event-queue.ts) against a plain first-in-first-out model: any mix of values
// arriving, taken (next, poll), looked at (peek), a bound that overflows, stop, completion and error gives the same
// values in the same order, the same length and size, and nothing after the end. Runs long enough that the queue's
// ring wraps around and grows.
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { Subject } from 'rxjs';
import { queueObservable } from '../../tools/live/event-queue.js';

type Step =
  | { readonly kind: 'arrive'; readonly size: number }
  | { readonly kind: 'poll' | 'peek' | 'next' | 'stop' | 'complete' | 'error' };

const takeOrArrive: fc.Arbitrary<Step> = fc.oneof(
  { weight: 16, arbitrary: fc.record({ kind: fc.constant('arrive' as const), size: fc.integer({ min: 0, max: 20 }) }) },
  { weight: 5, arbitrary: fc.record({ kind: fc.constant('poll' as const) }) },
  { weight: 2, arbitrary: fc.record({ kind: fc.constant('peek' as const) }) },
  { weight: 4, arbitrary: fc.record({ kind: fc.constant('next' as const) }) },
);
/** Values coming and going (long runs: the ring wraps around and grows), maybe an end, and what follows it. */
const stepsArbitrary: fc.Arbitrary<Step[]> = fc
  .tuple(
    fc.array(takeOrArrive, { minLength: 40, maxLength: 400, size: 'max' }),
    fc.option(fc.constantFrom({ kind: 'stop' as const }, { kind: 'complete' as const }, { kind: 'error' as const })),
    fc.array(takeOrArrive, { maxLength: 30 }),
  )
  .map(([before, end, after]) => [...before, ...(end === null ? [] : [end]), ...after]);

/** What the queue must do: the rules of event-queue.ts over a plain array. */
function model(steps: readonly Step[], maxSize: number): string[] {
  const out: string[] = [];
  const items: { id: number; size: number }[] = [];
  let size = 0;
  let ended = false;
  let failed = false;
  let overflows = 0;
  steps.forEach((step, id) => {
    if (step.kind === 'arrive') {
      if (!ended) {
        if (size + step.size > maxSize) {
          ended = true;
          overflows++;
        } else {
          items.push({ id, size: step.size });
          size += step.size;
        }
      }
    } else if (step.kind === 'poll' || step.kind === 'next') {
      const item = items.shift();
      if (item !== undefined) size -= item.size;
      out.push(`${step.kind} ${item === undefined ? (step.kind === 'next' ? (failed ? 'error' : ended ? 'null' : 'waits') : 'none') : item.id}`);
    } else if (step.kind === 'peek') out.push(`peek ${items[0]?.id ?? 'none'}`);
    else if (!ended) {
      ended = true;
      failed = step.kind === 'error';
    }
    out.push(`length ${items.length} size ${size} overflows ${overflows}`);
  });
  return out;
}

async function actual(steps: readonly Step[], maxSize: number): Promise<string[]> {
  const out: string[] = [];
  const source = new Subject<{ id: number; size: number }>();
  let overflows = 0;
  let ended = false;
  const queue = queueObservable(source, { maxSize, sizeOf: (value) => value.size, onOverflow: () => overflows++ });
  for (const [id, step] of steps.entries()) {
    if (step.kind === 'arrive') source.next({ id, size: step.size });
    else if (step.kind === 'poll') out.push(`poll ${queue.poll()?.id ?? 'none'}`);
    else if (step.kind === 'peek') out.push(`peek ${queue.peek()?.id ?? 'none'}`);
    else if (step.kind === 'next') {
      // A next() that would wait (nothing there, not ended) is not called: it would take the next value to arrive.
      if (queue.length === 0 && !ended && overflows === 0) out.push('next waits');
      else out.push(`next ${await queue.next().then((value) => (value === null ? 'null' : String(value.id)), () => 'error')}`);
    } else {
      if (step.kind === 'stop') queue.stop();
      else if (step.kind === 'complete') source.complete();
      else source.error(new Error('source failed'));
      ended = true;
    }
    out.push(`length ${queue.length} size ${queue.size} overflows ${overflows}`);
  }
  return out;
}

describe('queueObservable', () => {
  it('hands out values first in, first out within its bound, as the model does, whatever the steps', async () => {
    await fc.assert(
      // A bound that overflows soon, or one that lets a few hundred values wait.
      fc.asyncProperty(stepsArbitrary, fc.oneof(fc.integer({ min: 20, max: 300 }), fc.constant(1e9)), async (steps, maxSize) => {
        expect(await actual(steps, maxSize)).toEqual(model(steps, maxSize));
      }),
      { numRuns: 200 },
    );
  });
});
