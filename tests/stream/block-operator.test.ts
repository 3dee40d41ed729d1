// The shared shape of the block operators: a stage per subscription, errors of the stage end the stream, results
// in order (several per input allowed), teardown at unsubscribe, and a subscriber's own error never taken for the
// stage's.
import { describe, expect, it } from 'vitest';
import { config, from, Subject } from 'rxjs';
import { blockOperator } from '../../src/stream/block-operator.js';

describe('blockOperator', () => {
  it('builds one stage per subscription and passes every result on in order', () => {
    let built = 0;
    const double = blockOperator<number, number>(() => {
      built++;
      let seen = 0;
      return { next: (value, out) => void out.push(value, value + 0.5, ++seen) };
    });
    const first: number[] = [];
    const second: number[] = [];
    from([1, 2]).pipe(double).subscribe((value) => first.push(value));
    from([7]).pipe(double).subscribe((value) => second.push(value));
    expect(first).toEqual([1, 1.5, 1, 2, 2.5, 2]);
    expect(second).toEqual([7, 7.5, 1]);
    expect(built).toBe(2);
  });

  it("ends the stream with the stage's error and passes nothing of that input on", () => {
    const source = new Subject<number>();
    const seen: number[] = [];
    let failure: unknown = null;
    source
      .pipe(
        blockOperator<number, number>(() => ({
          next(value, out) {
            out.push(value);
            if (value < 0) throw new RangeError(`negative block ${value}`);
          },
        })),
      )
      .subscribe({ next: (value) => seen.push(value), error: (error) => (failure = error) });
    source.next(1);
    source.next(-2);
    source.next(3);
    expect(seen).toEqual([1]);
    expect(failure).toBeInstanceOf(RangeError);
    expect((failure as Error).message).toBe('negative block -2');
  });

  it('frees the stage at unsubscribe', () => {
    let freed = 0;
    const source = new Subject<number>();
    const subscription = source.pipe(blockOperator<number, number>(() => ({ next: (value, out) => void out.push(value), teardown: () => freed++ }))).subscribe();
    expect(freed).toBe(0);
    subscription.unsubscribe();
    expect(freed).toBe(1);
  });

  it("does not report a subscriber's own error as the stage's", async () => {
    // rxjs reports an error thrown by a subscriber's next as unhandled, on a timer; the stage's error path stays quiet.
    const reported: unknown[] = [];
    const previous = config.onUnhandledError;
    config.onUnhandledError = (error) => reported.push(error);
    try {
      let stageErrors = 0;
      from([1, 2])
        .pipe(blockOperator<number, number>(() => ({ next: (value, out) => void out.push(value) })))
        .subscribe({
          next: (value) => {
            throw new Error(`the subscriber broke on ${value}`);
          },
          error: () => stageErrors++,
        });
      await new Promise((resolve) => setTimeout(resolve, 10));
      expect(stageErrors).toBe(0);
      expect(reported.map((error) => (error as Error).message)).toEqual(['the subscriber broke on 1', 'the subscriber broke on 2']);
    } finally {
      config.onUnhandledError = previous;
    }
  });
});
