// The relay against rxjs's Subject (the reference it stands in for): any sequence of subscriptions, values,
// subscribers that come or go while a value is handed out, completion and error gives the same deliveries.
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { Subject, share, type Observable, type Observer, type Subscription } from 'rxjs';
import { createRelay } from '../../src/stream/index.js';

type Step =
  | { readonly kind: 'subscribe' }
  | { readonly kind: 'unsubscribe'; readonly which: number }
  | { readonly kind: 'next'; readonly value: number }
  /** While subscriber `by` is handed `value`, it unsubscribes subscriber `which`, or subscribes a new one. */
  | { readonly kind: 'next-and'; readonly value: number; readonly by: number; readonly which: number; readonly then: 'unsubscribe' | 'subscribe' }
  | { readonly kind: 'complete' }
  | { readonly kind: 'error' };

const stepArbitrary: fc.Arbitrary<Step> = fc.oneof(
  { weight: 3, arbitrary: fc.constant({ kind: 'subscribe' as const }) },
  { weight: 2, arbitrary: fc.record({ kind: fc.constant('unsubscribe' as const), which: fc.nat(20) }) },
  { weight: 5, arbitrary: fc.record({ kind: fc.constant('next' as const), value: fc.integer() }) },
  {
    weight: 2,
    arbitrary: fc.record({ kind: fc.constant('next-and' as const), value: fc.integer(), by: fc.nat(20), which: fc.nat(20), then: fc.constantFrom('unsubscribe' as const, 'subscribe' as const) }),
  },
  { weight: 1, arbitrary: fc.constant({ kind: 'complete' as const }) },
  { weight: 1, arbitrary: fc.constant({ kind: 'error' as const }) },
);

/** Runs the steps on a subject-like and returns every delivery, in order, as text. */
function deliveries(target: Observable<number> & Observer<number>, steps: readonly Step[]): string[] {
  const log: string[] = [];
  const subscriptions: Subscription[] = [];
  let hook: { value: number; by: number; act: () => void } | null = null;
  const subscribe = (): void => {
    const id = subscriptions.length;
    subscriptions.push(
      target.subscribe({
        next(value) {
          log.push(`${id} next ${value}`);
          if (hook !== null && hook.value === value && hook.by === id) {
            const act = hook.act;
            hook = null;
            act();
          }
        },
        error: (error: unknown) => log.push(`${id} error ${String(error)}`),
        complete: () => log.push(`${id} complete`),
      }),
    );
  };
  for (const step of steps) {
    if (step.kind === 'subscribe') subscribe();
    else if (step.kind === 'unsubscribe') subscriptions[step.which % Math.max(1, subscriptions.length)]?.unsubscribe();
    else if (step.kind === 'next') target.next(step.value);
    else if (step.kind === 'next-and') {
      const count = Math.max(1, subscriptions.length);
      const which = step.which % count;
      hook = { value: step.value, by: step.by % count, act: step.then === 'subscribe' ? subscribe : () => subscriptions[which]?.unsubscribe() };
      target.next(step.value);
      hook = null;
    } else if (step.kind === 'complete') target.complete();
    else target.error(new Error('failed'));
  }
  return log;
}

describe('createRelay', () => {
  it('delivers as rxjs Subject does, whatever the subscriptions, values and ends', () => {
    fc.assert(
      fc.property(fc.array(stepArbitrary, { maxLength: 40 }), (steps) => {
        expect(deliveries(createRelay<number>(), steps)).toEqual(deliveries(new Subject<number>(), steps));
      }),
      { numRuns: 500 },
    );
  });

  it("serves as share's connector: the shared values and the resubscription after all left are those of a Subject", () => {
    const run = (connector: () => Subject<number> | ReturnType<typeof createRelay<number>>) => {
      const source = new Subject<number>();
      const shared = source.pipe(share({ connector }));
      const log: string[] = [];
      const first = shared.subscribe((value) => log.push(`a ${value}`));
      const second = shared.subscribe((value) => log.push(`b ${value}`));
      source.next(1);
      first.unsubscribe();
      source.next(2);
      second.unsubscribe();
      source.next(3); // nobody there: the connection is closed
      shared.subscribe((value) => log.push(`c ${value}`));
      source.next(4);
      source.complete();
      return { log, observed: source.observed };
    };
    expect(run(() => createRelay<number>())).toEqual(run(() => new Subject<number>()));
  });
});
