// The one shape of every block operator in this folder, written once: per subscription a stage of its own; each
// input handled inside a guard (a malformed block or a stage error ends the stream with that error), its results
// passed on outside it (a subscriber's own error is never reported as the stage's); teardown frees the stage.

import { Observable, type OperatorFunction } from 'rxjs';

/** One subscription's stage. */
export interface BlockStep<I, O> {
  /** Handles one input, pushing its results (none, one or several) onto `out`; throws on a malformed input. */
  next(input: I, out: O[]): void;
  /** Frees what the stage holds, at unsubscribe. */
  teardown?(): void;
}

/** An operator that builds a fresh `BlockStep` per subscription with `start` and runs every input through it. */
export function blockOperator<I, O>(start: () => BlockStep<I, O>): OperatorFunction<I, O> {
  return (source) =>
    new Observable<O>((subscriber) => {
      const step = start();
      const out: O[] = [];
      const subscription = source.subscribe({
        next(input) {
          try {
            step.next(input, out);
          } catch (error) {
            out.length = 0;
            subscriber.error(error);
            return;
          }
          for (let i = 0; i < out.length && !subscriber.closed; i++) subscriber.next(out[i]!);
          out.length = 0;
        },
        error: (error: unknown) => subscriber.error(error),
        complete: () => subscriber.complete(),
      });
      return () => {
        subscription.unsubscribe();
        step.teardown?.();
      };
    });
}
